"""The SMT encoding of the world model (DESIGN 4) and of typed expressions, for z3.

Written independently of the simulator: here the world is a set of constraints over symbolic
inputs for a fixed bound K of legs. Conventions:

- a Direction is an Int: 1 nominal, -1 reverse, 0 unknown (so ``flip`` is negation);
- a Running is a Bool: true = forward;
- Counts are Ints, Numbers and Lengths are Reals;
- a sign times a value is an if-then-else, never a product (the logic stays linear);
- floor(t) is a fresh Int k with k <= t < k + 1 (portable linear integer/real arithmetic).

Every derived quantity that a reader may want from a model gets its own named constant with a
defining equality, so models can be compared value by value with the simulator.
"""

from __future__ import annotations

import math

import z3

from verifier.check.model import Pack, Rule
from verifier.lang import ast
from verifier.lang.ast import COUNT, ZERO
from verifier.lang.scope import Scope
from verifier.lang.vocab import LEG, MAX_CODE, Q_SCALES, UNKNOWN_CODE, Direction, Running

_DIR_CODE = {Direction.NOMINAL: 1, Direction.REVERSE: -1, Direction.UNKNOWN: 0}
OVERRIDE = "$override"   # env key: sub-terms replaced by given terms (accumulator parameters)
ITEM = "$item"           # env key: the information item an info_* formula is evaluated for


class Terms:
    """Vocabulary names and typed expressions as z3 terms, over one state of the world.

    The bounded :class:`Encoding` is one of these (its state is the end of its legs); a proof
    for any number of legs (:mod:`verifier.smt.induction`) makes one per state of its path,
    all in one context, each with its own prefix for the constants it defines."""

    pack: Pack
    ctx: z3.Context
    prefix: str
    constraints: list
    terms: dict
    legs: list

    def _setup(self, pack: Pack, ctx: z3.Context, prefix: str, constraints: list) -> None:
        self.pack = pack
        self.ctx = ctx
        # prefixed to every derived constant (never to inputs), so that two encodings of two
        # versions of a pack can share one context and one set of inputs (verifier diff)
        self.prefix = prefix
        self.constraints = constraints
        self.terms = {}          # vocabulary name -> term
        self.legs = []           # per leg: field -> term
        self.qlegs = None        # a route's physical legs for quantifiers (else self.legs)
        self._memo: dict = {}
        self._fresh = 0
        self._wire_done = False
        # the real world's bounds (the [world] table as the physics obeys it); the onboard's
        # bounds (est.bound_over, the expectation window) and every world.* a design formula
        # reads keep the pack's stated values. ``verifier margin --vary`` moves this one only.
        self.world = pack.scope
        self.named: dict = {}    # assumption name -> the constraints it stands for (margins)

    def bounded(self, name: str, *cs) -> None:
        """Constraints of one named assumption (a [world] bound): kept, and remembered under
        ``name`` so that a margin's core can track them one by one."""
        self.constraints.extend(cs)
        self.named.setdefault(name, []).extend(cs)

    # ---- helpers ------------------------------------------------------------------------
    def real(self, name):
        return z3.Real(name, self.ctx)

    def int(self, name):
        return z3.Int(name, self.ctx)

    def boolean(self, name):
        return z3.Bool(name, self.ctx)

    def num(self, text) -> z3.ArithRef:
        return z3.RealVal(str(text), self.ctx)

    def ival(self, n: int) -> z3.ArithRef:
        return z3.IntVal(n, self.ctx)

    def define(self, name: str, term, sort: str = "real"):
        """A named constant equal to ``term`` (keeps terms small, models readable)."""
        c = {"real": self.real, "int": self.int, "bool": self.boolean}[sort](self.prefix + name)
        self.constraints.append(c == term)
        return c

    def floor_int(self, t):
        """A fresh Int k with k <= t < k + 1."""
        self._fresh += 1
        k = self.int(f"{self.prefix}floor!{self._fresh}")
        self.constraints.append(z3.ToReal(k) <= t)
        self.constraints.append(t < z3.ToReal(k) + 1)
        return k

    @staticmethod
    def along(d, x):
        return z3.If(d == -1, -x, x)

    @staticmethod
    def pos(x):
        return z3.If(x > 0, x, 0)

    # ---- the world (DESIGN 4.1 to 4.3), written once: inputs, first state, one leg --------
    def _static(self) -> dict:
        """The inputs that do not change with the legs, their scope, and what follows from
        them alone (DESIGN 4.1, 4.2 at the detection instant, 4.3)."""
        sc, C = self.world, self.constraints
        num = self.num
        balises, read = self.int("lrbg.balises"), self.int("lrbg.read")
        linked = self.boolean("lrbg.linked")
        locacc, offset = self.int("lrbg.locacc"), self.real("lrbg.offset")
        length, antenna = self.real("train.length"), self.real("train.antenna")
        direction = self.int("passage.direction")
        pfwd = self.boolean("passage.forward")
        det = self.real("passage.detect_error")
        self.inputs.update({"lrbg.balises": balises, "lrbg.read": read, "lrbg.linked": linked,
                            "lrbg.locacc": locacc, "lrbg.offset": offset,
                            "train.length": length, "train.antenna": antenna,
                            "passage.direction": direction, "passage.running": pfwd,
                            "passage.detect_error": det})
        locacc_r = z3.ToReal(locacc)
        B = self.bounded
        B("world.balises", balises >= sc.balises[0], balises <= sc.balises[1])
        C += [read >= 1, read <= balises]
        # Q_LOCACC is a whole number of metres: a bound between two is the whole metre inside
        B("world.locacc.low", locacc >= math.ceil(sc.locacc[0]))
        B("world.locacc.high", locacc <= math.floor(sc.locacc[1]))
        C += [offset >= -locacc_r, offset <= locacc_r]
        B("world.train_length.low", length >= num(sc.train_length[0]))
        B("world.train_length.high", length <= num(sc.train_length[1]))
        B("world.antenna.low", antenna >= num(sc.antenna[0]))
        B("world.antenna.high", antenna <= num(sc.antenna[1]))
        C += [antenna <= length, z3.Or(direction == 1, direction == -1)]
        B("world.detection", det >= -num(sc.detection), det <= num(sc.detection))
        return {"lrbg.balises": balises, "lrbg.read": read, "lrbg.linked": linked,
                "lrbg.locacc": locacc_r, "lrbg.offset": offset, "train.length": length,
                "train.antenna": antenna, "passage.direction": direction,
                "passage.running": pfwd, "passage.detect_error": det}

    def _passage_bound(self, S: dict) -> None:
        """The reading error bound at the passage itself (j = 0, E = 0; DESIGN 4.1). With the
        detection error on top of the odometry bound (the default) it is bounded on its own."""
        sc, det = self.world, S["passage.detect_error"]
        if not sc.detection_in_odometry:
            return
        self.bounded("world.odometry_over", self.pos(-det) <= self.num(sc.odometry_over.fixed))
        self.bounded("world.odometry_under", self.pos(det) <= self.num(sc.odometry_under.fixed))

    def _bounds_at(self, measured) -> tuple:
        """The over- and under-reading bounds the onboard uses at a measured distance: the
        odometry's, with world.detection on top unless it is counted inside."""
        sc, num = self.pack.scope, self.num
        extra = num(0) if sc.detection_in_odometry else num(sc.detection)
        return (num(sc.odometry_over.fixed) + num(sc.odometry_over.rate) * measured + extra,
                num(sc.odometry_under.fixed) + num(sc.odometry_under.rate) * measured + extra)

    def _first(self, S: dict, tag: str = "") -> dict:
        """The state at the detection instant, before any leg; adds to ``S`` what follows from
        the inputs alone (the passage as the onboard sees it). ``tag`` keeps the constants of
        a second track apart (the world as G2 sees it, DESIGN 4.8)."""
        direction, pfwd = S["passage.direction"], S["passage.running"]
        det = S["passage.detect_error"]
        o = self.define(f"actual.orientation@{tag}0", z3.If(pfwd, direction, -direction), "int")
        front = self.define(f"actual.front@{tag}0", S["lrbg.offset"] + self.along(direction, det)
                            + self.along(o, S["train.antenna"]))
        op = self.define(f"est.orientation_passage@{tag}0", z3.If(pfwd, 1, -1), "int")
        est_p = self.define(f"est.front_passage@{tag}0", self.along(op, S["train.antenna"]))
        S.setdefault("prv", z3.BoolVal(False, self.ctx))
        known = self.define(f"passage.known{'@' + tag if tag else ''}",
                            z3.Or(S["lrbg.read"] >= 2, S["lrbg.linked"], S["prv"]), "bool")
        S["two_groups"] = z3.And(S["lrbg.balises"] == 1, z3.Not(S["lrbg.linked"]))
        S.update({"passage.seen": z3.If(known, direction, 0), "known": known,
                  "frame": z3.If(known, direction, 1)})
        if not tag:
            self.known_first = known       # the onboard knows the direction over G1
        S["passage.actual_front"] = front
        S["passage.est_front"] = self.along(S["frame"], est_p)
        return {"count": self.ival(0), "o": o, "op": op, "motion": direction, "front": front,
                "est_p": est_p, "over": self.pos(-det), "under": self.pos(det),
                "measured": self.num(0), "basis": self.num(0), "cabs": [], "travelled": [],
                "accs": {}, "frozen": {}}

    def _step(self, S: dict, st: dict, leg: tuple, *, active, index, tag: str,
              plan=None, view=None, bounded_if=None) -> tuple:
        """One leg (DESIGN 4.2, 4.3): the state after it and the leg's fields. ``active`` says
        whether the leg happens (the bounded encoding fixes inactive legs to do nothing);
        ``index`` is the leg's number. With a ``plan`` the accumulators and frozen legs of
        DESIGN 4.7 are updated too, their bodies read through ``view``."""
        sc, C, num = self.world, self.constraints, self.num
        cab, fwd, dist, odo = leg
        length = S["train.length"]
        self.bounded("world.leg_distance", z3.Implies(active, z3.And(dist >= num(sc.leg_distance[0]),
                                                                     dist <= num(sc.leg_distance[1]))))
        C += [dist >= 0, odo >= 0]
        o, op = st["o"], st["op"]
        front_c = z3.If(cab, st["front"] - self.along(o, length), st["front"])
        est_c = z3.If(cab, st["est_p"] - self.along(op, length), st["est_p"])
        o = self.define(f"actual.orientation@{tag}", z3.If(cab, -o, o), "int")
        op = self.define(f"est.orientation_passage@{tag}", z3.If(cab, -op, op), "int")
        m = self.define(f"actual.motion@{tag}", z3.If(fwd, o, -o), "int")
        mp = z3.If(fwd, op, -op)
        front = self.define(f"actual.front@{tag}", front_c + self.along(m, dist))
        est_p = self.define(f"est.front_passage@{tag}", est_c + self.along(mp, odo))
        motion = self.define(f"actual.motion_last@{tag}", z3.If(active, m, st["motion"]), "int")
        over = st["over"] + self.pos(odo - dist)
        under = st["under"] + self.pos(dist - odo)
        basis = st["basis"] + (odo if sc.odometry_basis == "measured" else dist)
        # the odometry bound covers the detection error too, or (the default) only the legs'
        # errors: the detection error's share is then added to the bound
        det0 = S["passage.detect_error"]
        xo, xu = ((num(0), num(0)) if sc.detection_in_odometry else (self.pos(-det0), self.pos(det0)))
        limits = [over <= num(sc.odometry_over.fixed) + num(sc.odometry_over.rate) * basis + xo,
                  under <= num(sc.odometry_under.fixed) + num(sc.odometry_under.rate) * basis + xu]
        # the bound holds from the current LRBG: ``bounded_if`` says when these counters are
        # the current LRBG's (G1's, up to a relocation; DESIGN 4.8)
        if bounded_if is not None:
            limits = [z3.Implies(bounded_if, x) for x in limits]
        self.bounded("world.odometry_over", limits[0])
        self.bounded("world.odometry_under", limits[1])
        known = S["known"]
        fields = {
            "index": index, "cab_change": cab, "running": fwd, "distance": dist,
            "odometer": odo,
            "orientation": z3.If(known, o, 0), "motion": z3.If(known, m, 0),
            "actual_orientation": o, "actual_motion": m, "actual_front": front,
            "est_front": self.along(S["frame"], est_p), "active": active,
        }
        new = {"count": z3.If(active, index, st["count"]), "o": o, "op": op, "motion": motion,
               "front": front, "est_p": est_p, "over": over, "under": under,
               "measured": st["measured"] + odo, "basis": basis,
               "cabs": st["cabs"] + [z3.If(cab, 1, 0)], "travelled": st["travelled"] + [dist],
               "accs": dict(st["accs"]), "frozen": dict(st["frozen"])}
        if plan is not None:
            for fam in plan.accumulators:
                for v in fam.valuations:
                    body = view.body_term(fam, fields, v)
                    old = st["accs"][(fam.key, v)]
                    grown = {"all": lambda: z3.And(old, body), "any": lambda: z3.Or(old, body),
                             "count": lambda: old + z3.If(body, 1, 0),
                             "sum": lambda: old + body}[fam.kind]()
                    new["accs"][(fam.key, v)] = z3.If(active, grown, old)
            for i, field in plan.frozen:
                now = z3.And(active, index == i)
                new["frozen"][(i, field)] = z3.If(now, fields[field], st["frozen"][(i, field)])
        return new, fields

    def _names(self, S: dict, st: dict, count) -> None:
        """The vocabulary of DESIGN 4 at state ``st`` (``count`` legs so far)."""
        sc, num = self.pack.scope, self.num
        frame, known = S["frame"], S["known"]
        o, op, motion, est_p = st["o"], st["op"], st["motion"], st["est_p"]
        measured = self.define("est.travelled", st["measured"])
        cabs, travelled = st["cabs"], st["travelled"]
        self.terms.update({k: v for k, v in S.items() if k not in ("known", "frame", "prv", "prv_group", "two_groups")})
        self.terms.update({
            "legs.count": count,
            "cab_changes": z3.Sum(cabs) if cabs else self.ival(0),
            "actual.front": st["front"], "actual.rear": st["front"] - self.along(o, S["train.length"]),
            "actual.orientation": o, "actual.motion": motion,
            "actual.travelled": z3.Sum(travelled) if travelled else num(0),
            "actual.over_reading": st["over"], "actual.under_reading": st["under"],
            "est.front_passage": est_p,
            "est.front": self.define("est.front", self.along(frame, est_p)),
            "est.rear": self.along(frame, est_p - self.along(op, S["train.length"])),
            "est.orientation": z3.If(known, o, 0), "est.motion": z3.If(known, motion, 0),
            "est.travelled": measured,
            "est.bound_over": self._bounds_at(measured)[0],
            "est.bound_under": self._bounds_at(measured)[1],
            "lrbg.two_groups": S["two_groups"],
            "report.two_groups": S["two_groups"],
            "report.prv_lrbg": z3.If(S["prv"], S.get("prv_group", self.ival(1)), 0),
        })
        self.known = known

    def _group_names(self, S1: dict, Gs: list, count) -> None:
        """lrbg.group, journey.legs, g1.* and, with a route, every later group's names, the
        onboard's list of LRBGs and what linking gives (DESIGN 4.8, 4.10)."""
        T, num = self.terms, self.num
        T.update({"journey.legs": count, "g1.balises": S1["lrbg.balises"], "g1.read": S1["lrbg.read"],
                  "g1.linked": S1["lrbg.linked"], "g1.locacc": S1["lrbg.locacc"],
                  "g1.offset": S1["lrbg.offset"]})
        if not Gs:
            T["lrbg.group"] = self.ival(1)
            return
        R = self._route
        H = self.pack.scope.history
        became = [z3.BoolVal(True, self.ctx)] + [G["lrbg"] for G in Gs]
        ones = [z3.If(b, 1, 0) for b in became]
        # the list holds the last `history` LRBGs, the current one included (DESIGN 4.10)
        remembered = [self.define(f"g{k}.remembered", z3.And(became[k - 1], z3.Sum(ones[k:]) <= H - 1)
                                  if k < len(became) else became[k - 1], "bool")
                      for k in range(1, len(became) + 1)]
        T.update({"lrbg.group": R["group"], "lrbg.previous": R["previous"],
                  "lrbg.remembered": self.define("lrbg.remembered", z3.If(z3.Sum(ones) <= H, z3.Sum(ones), H), "int"),
                  "g1.remembered": remembered[0], "g1.link_position": num(0), "g1.link_orientation": self.ival(1)})
        positions, orientations = [num(0)], [self.ival(1)]
        for k, G in enumerate(Gs, 2):
            n = f"g{k}"
            linking = z3.And(G["linked"], self.known_first)
            T.update({f"{n}.lrbg": G["lrbg"], f"{n}.in_window": G["in_window"],
                      f"{n}.locacc": z3.ToReal(G["locacc"]),
                      f"{n}.link_distance": z3.If(linking, G["distance"], num(0)),
                      f"{n}.link_side": z3.If(linking, G["side"], 0),
                      f"{n}.link_orientation": z3.If(linking, G["orientation"], 0),
                      f"{n}.remembered": remembered[k - 1],
                      f"{n}.link_position": z3.If(linking, R["marks"][k - 1], num(0))})
            for f in ("distance", "side", "orientation", "balises", "read", "linked", "offset",
                      "found", "at", "detect_error"):
                T[f"{n}.{f}"] = G[f]
            positions.append(T[f"{n}.link_position"])
            orientations.append(T[f"{n}.link_orientation"])
        pos, ori = positions[0], orientations[0]
        for k in range(2, len(positions) + 1):
            pos = z3.If(R["group"] == k, positions[k - 1], pos)
            ori = z3.If(R["group"] == k, orientations[k - 1], ori)
        T["lrbg.link_position"], T["lrbg.link_orientation"] = pos, ori

    # ---- a route's groups and hand-overs, written once (DESIGN 4.8, 4.10) ------------------
    def _group_static(self, k: int, extra: dict) -> dict:
        """Later group ``k``'s inputs that never change (its place, orientation, balises,
        linking, accuracy, real offset) with their scope; ``extra``: inputs registered with
        them (the bounded encoding's detection of the group)."""
        sc, C, num, n = self.world, self.constraints, self.num, f"g{k}"
        gs = sc.group(k)
        g = {"distance": self.real(f"{n}.distance"), "side": self.int(f"{n}.side"),
             "orientation": self.int(f"{n}.orientation"), "balises": self.int(f"{n}.balises"),
             "read": self.int(f"{n}.read"), "linked": self.boolean(f"{n}.linked"),
             "locacc": self.int(f"{n}.locacc"), "offset": self.real(f"{n}.offset"), **extra}
        self.inputs.update({f"{n}.{f}": v for f, v in g.items()})
        acc = z3.ToReal(g["locacc"])
        if k == 2:
            side = {"nominal": [g["side"] == 1], "reverse": [g["side"] == -1],
                    "any": [z3.Or(g["side"] == 1, g["side"] == -1)]}[sc.g2_side]
        else:               # a route runs one way (DESIGN 4.10)
            side = [g["side"] == self.inputs["g2.side"]]
        orient = {"same": [g["orientation"] == 1], "opposite": [g["orientation"] == -1],
                  "any": [z3.Or(g["orientation"] == 1, g["orientation"] == -1)]}[gs.orientation]
        C += side + orient + [
            g["distance"] >= num(gs.distance[0]), g["distance"] <= num(gs.distance[1]),
            g["balises"] >= gs.balises[0], g["balises"] <= gs.balises[1],
            g["read"] >= 1, g["read"] <= g["balises"],
            g["locacc"] >= int(gs.locacc[0]), g["locacc"] <= int(gs.locacc[1]),
            g["offset"] >= -acc, g["offset"] <= acc]
        return g

    def _detected(self, k: int, G: dict, here, real: dict, leg: tuple, antenna) -> None:
        """Group ``k`` found at the end of this leg: the real antenna on its real mark plus the
        detection error along the movement, the leg moving onto it (DESIGN 4.8)."""
        mark = self._route["marks"][k - 1] + self.along(G["orientation"], G["offset"])
        real_antenna = real["front"] - self.along(real["o"], antenna)
        self.constraints.append(z3.Implies(here, z3.And(
            real_antenna == mark + self.along(real["motion"], G["detect_error"]),
            leg[2] > 0, leg[2] > G["detect_error"])))

    def _judge(self, k: int, G: dict, cur: dict, st: dict, fwd, i: int) -> tuple:
        """Whether group ``k``, found at the end of leg ``i``, becomes the LRBG as judged from
        the current LRBG (DESIGN 4.8, 4.10): (accepted, inside its window, its passage)."""
        S, num = cur["S"], self.num
        x = self._route["marks"][k - 1]
        e = self.along(cur["frame"], x - cur["origin"])         # its mark in the current frame
        way = z3.If(e > 0, 1, -1)
        dist = z3.If(e > 0, e, -e)
        acc = z3.ToReal(G["locacc"])
        est_antenna = self.along(S["passage.direction"], st["est_p"]) - self.along(st["o"], S["train.antenna"])
        u = self.along(way, est_antenna)
        b_over, b_under = self._bounds_at(st["measured"])
        lo = u - S["lrbg.locacc"] - b_over
        hi = u + S["lrbg.locacc"] + b_under
        linking = z3.And(G["linked"], self.known_first, S["known"], z3.Or(cur["group"] == 1, cur["linked"]))
        window = z3.And(linking, hi >= dist - acc, lo <= dist + acc)
        m = st["motion"]                                        # the leg's motion, current frame
        single = G["balises"] == 1
        ok = z3.If(linking, z3.And(window, m == way), z3.Or(single, G["read"] >= 2))
        # a single-balise group without usable linking is referred to the move from the current
        # LRBG towards it, or has every direction unknown (SUBSET-026 3.4.2.3.3.2, 3.4.2.3.3.4)
        prv = z3.And(z3.Not(linking), single, m == way)
        fk = z3.If(prv, self.along(cur["frame"], way), G["orientation"])
        S_k = {"lrbg.balises": G["balises"], "lrbg.read": G["read"],
               "lrbg.linked": z3.And(G["linked"], z3.Or(linking, z3.Not(single))),
               "prv": prv, "prv_group": cur["group"],
               "lrbg.locacc": z3.ToReal(G["locacc"]),
               # its real mark's offset in its frame as the LRBG (turned when referred to the move)
               "lrbg.offset": z3.If(fk == G["orientation"], G["offset"], -G["offset"]),
               "train.length": S["train.length"], "train.antenna": S["train.antenna"],
               "passage.direction": self.along(fk, self.along(cur["frame"], m)),
               "passage.running": fwd, "passage.detect_error": G["detect_error"],
               "frame": fk, "origin": x, "linked_k": G["linked"]}
        return ok, window, S_k

    _PASSAGE = ("lrbg.balises", "lrbg.read", "lrbg.linked", "prv", "prv_group", "lrbg.locacc",
                "lrbg.offset", "train.length", "train.antenna", "passage.direction",
                "passage.running", "passage.detect_error")

    def _restart(self, cur: dict, st: dict, events: list, i: int) -> tuple:
        """After leg ``i``: the current LRBG and the state, restarted at the detection of the group
        that became the LRBG there (at most one group is found at a leg)."""
        S = cur["S"]
        reset = z3.Or([ok for ok, *_ in events]) if events else z3.BoolVal(False, self.ctx)
        new = {key: S.get(key, self.ival(1)) for key in self._PASSAGE}
        frame, origin, group, linked = cur["frame"], cur["origin"], cur["group"], cur["linked"]
        for ok, k, S_k in reversed(events):
            new = {key: z3.If(ok, S_k[key], new[key]) for key in self._PASSAGE}
            frame = z3.If(ok, S_k["frame"], frame)
            origin = z3.If(ok, S_k["origin"], origin)
            group = z3.If(ok, k, group)
            linked = z3.If(ok, S_k["linked_k"], linked)
        nxt = {"start": z3.If(reset, self.ival(i), cur["start"]),
               "origin": self.define(f"lrbg.origin@{i}", origin), "frame": self.define(f"lrbg.frame@{i}", frame, "int"),
               "group": self.define(f"lrbg.group@{i}", group, "int"),
               "previous": z3.If(reset, cur["group"], cur["previous"]), "linked": linked,
               "reset": reset}
        nxt["S"] = S2 = {key: self.define(f"{key}@{i}", v, "bool" if key in ("lrbg.linked", "prv", "passage.running")
                               else "int" if key in ("lrbg.balises", "lrbg.read", "prv_group", "passage.direction")
                               else "real") for key, v in new.items()}
        if self.world.detection_in_odometry:    # the reading bound at the new LRBG's passage
            det = S2["passage.detect_error"]
            self.bounded("world.odometry_over", z3.Implies(reset, self.pos(-det) <= self.num(self.world.odometry_over.fixed)))
            self.bounded("world.odometry_under", z3.Implies(reset, self.pos(det) <= self.num(self.world.odometry_under.fixed)))
        first = self._first(S2, tag=f"r{i}")
        merged = dict(st)
        for key in ("o", "op", "motion", "front", "est_p", "over", "under", "measured", "basis"):
            merged[key] = z3.If(reset, first[key], st[key])
        merged["cabs"] = [z3.If(reset, 0, z3.Sum(st["cabs"]) if st["cabs"] else 0)]
        merged["travelled"] = [z3.If(reset, self.num(0), z3.Sum(st["travelled"]) if st["travelled"] else self.num(0))]
        return nxt, merged

    def _marks(self, Gs: list) -> None:
        """Every group's engineered mark in G1's frame: the route runs the way of g2.side."""
        total = self.num(0)
        for k, G in enumerate(Gs, 2):
            total = total + G["distance"]
            self._route["marks"].append(self.define(f"g{k}.mark", self.along(Gs[0]["side"], total)))

    # ---- the wire (DESIGN 4.4) ----------------------------------------------------------
    # The step is an Int c (0: 10 cm, 1: 1 m, 2: 10 m). Whether a step fits is written as
    # linear conditions on the unrounded values (only D_LRBG's rounding, which the widened
    # doubts need, is computed at every candidate step); the values are then rounded once, at
    # the chosen step, by scaling with an if-then-else. The simulator computes the same thing
    # the plain way (round at every step, pick the first that fits); the tests compare them.
    def _scaled(self, x, c):
        """x / step(c), linear: an if-then-else over the three constant steps."""
        return z3.If(c == 0, x * 10, z3.If(c == 1, x, x * self.num("1/10")))

    def _unscaled(self, k, c):
        kr = z3.ToReal(k)
        return z3.If(c == 0, kr * self.num("1/10"), z3.If(c == 1, kr, kr * 10))

    def _wire(self) -> None:
        T, C = self.terms, self.constraints
        d = self.name("est.d_lrbg")
        over = self.name("est.l_doubtover")
        under = self.name("est.l_doubtunder")
        mode = self.pack.rounding
        half = self.num("1/2")
        steps = [0, 1, 2] if self.pack.q_scale == "auto" else [Q_SCALES[self.pack.q_scale]]
        qs = {0: self.num("1/10"), 1: self.num(1), 2: self.num(10)}
        kd_at, w_at, fits = {}, {}, {}
        for c in steps:
            q = qs[c]
            lim = self.num(MAX_CODE)
            if mode == "nearest":
                fits[c] = z3.And([z3.And(x >= -q * half, x < (lim + half) * q) for x in (d, over, under)])
            elif mode == "down":
                fits[c] = z3.And([z3.And(x >= 0, x < (lim + 1) * q) for x in (d, over, under)])
            else:
                kd = self.floor_int(self._scaled(d, self.ival(c)) + half)
                rd = z3.ToReal(kd) * q
                w = self.define(f"report.widen@{c}", z3.If(rd >= d, rd - d, d - rd))
                kd_at[c], w_at[c] = kd, w
                fits[c] = z3.And(kd >= 0, kd <= MAX_CODE,
                                 *[z3.And(x + w > -q, x + w <= lim * q) for x in (over, under)])
        c = self.int(self.prefix + "report.step")
        self.step_choice = c
        if len(steps) == 1:
            C.append(c == steps[0])
        else:
            C.append(c == z3.If(fits[0], 0, z3.If(fits[1], 1, 2)))
        step = self.define("report.q_scale", self._unscaled(self.ival(1), c))
        T["report.q_scale"] = step
        T["report.code.q_scale"] = c
        if mode == "nearest":
            ks = [self.floor_int(self._scaled(x, c) + half) for x in (d, over, under)]
        elif mode == "down":
            ks = [self.floor_int(self._scaled(x, c)) for x in (d, over, under)]
        else:
            pick = (lambda m: m[steps[0]]) if len(steps) == 1 else (
                lambda m: z3.If(c == 0, m[0], z3.If(c == 1, m[1], m[2])))
            kd, w = pick(kd_at), pick(w_at)
            ks = [kd] + [-self.floor_int(-self._scaled(x + w, c)) for x in (over, under)]
        in_range = []
        for key, k in zip(("d_lrbg", "l_doubtover", "l_doubtunder"), ks):
            T[f"report.{key}"] = self.define(f"report.{key}", self._unscaled(k, c))
            ok = z3.And(self.known, k >= 0, k <= MAX_CODE)
            code = self.define(f"report.code.{key}", z3.If(ok, k, UNKNOWN_CODE), "int")
            T[f"report.code.{key}"] = code
            T[f"rbc.{key}"] = self.define(f"rbc.{key}", self._unscaled(code, c))
            in_range.append(code <= MAX_CODE)
        quals = []
        for q in ("q_dlrbg", "q_dirlrbg", "q_dirtrain"):
            v = self.define(f"report.{q}", z3.If(self.known, self.name(f"est.{q}"), 0), "int")
            T[f"report.{q}"] = v
            T[f"report.code.{q}"] = z3.If(v == 1, 1, z3.If(v == -1, 0, 2))
            quals.append(v != 0)
        T["report.in_range"] = self.define("report.in_range", z3.And(in_range), "bool")
        T["rbc.placed"] = self.define("rbc.placed", z3.And(T["report.in_range"], *quals), "bool")
        self._wire_done = True

    # ---- names and expressions ------------------------------------------------------------
    def name(self, name: str):
        if name in self.terms:
            return self.terms[name]
        if name.startswith("info."):           # info.ID.FIELD (DESIGN 4.9)
            _, info_id, field = name.split(".")
            return self.info_term(info_id, field)
        if name.startswith("est.") and name[4:] in self.pack.onboard:
            t = self.definition(("onboard", name[4:]))
        elif name.startswith("rbc.") and name[4:] in self.pack.trackside:
            t = self.definition(("trackside", name[4:]))
        elif name.startswith(("report.", "rbc.")) and not self._wire_done:
            self._wire()
            return self.terms[name]
        else:
            raise KeyError(name)
        self.terms[name] = t
        return t

    def definition(self, dep: tuple):
        if dep not in self._memo:
            formula = self.pack.definition(dep)
            term = self.expr(formula.node, {})
            sort = {"Bool": "bool", "Count": "int"}.get(formula.node.ty, "real")
            if formula.node.ty == "Direction":
                sort = "int"
            self._memo[dep] = self.define(f"{dep[0]}.{dep[1]}", term, sort)
            # the defining equality, just added: an assumption a margin's core may name
            self.named[f"[{dep[0]}] {dep[1]}"] = [self.constraints[-1]]
        return self._memo[dep]

    def leg_field(self, i: int, field: str):
        """``legs[i].field`` (the bounded encoding: leg i of its legs)."""
        if i > len(self.legs):   # only reachable under an unsatisfiable premise legs.count >= i
            return self._dummy(field)
        return self.legs[i - 1][field]

    def quantify(self, node: ast.Quant, env: dict):
        """A leg quantifier over the legs of this encoding, each guarded by its activity."""
        e = self.expr
        items = []
        # a route's legs since the current LRBG are the physical legs after its detection, each
        # guarded by that (the order of the legs does not matter to a quantifier)
        for leg in self.qlegs or self.legs:
            items.append((leg["active"], e(node.body, {**env, node.var: leg})))
        if node.kind == "all":
            return z3.And([z3.Implies(a, b) for a, b in items]) if items else z3.BoolVal(True, self.ctx)
        if node.kind == "any":
            return z3.Or([z3.And(a, b) for a, b in items]) if items else z3.BoolVal(False, self.ctx)
        if node.kind == "count":
            return z3.Sum([z3.If(z3.And(a, b), 1, 0) for a, b in items]) if items else self.ival(0)
        zero = self.ival(0) if node.ty == COUNT else self.num(0)
        return z3.Sum([z3.If(a, b, zero) for a, b in items]) if items else zero

    # ---- trackside information items (DESIGN 4.9) -------------------------------------------
    def item_terms(self, item) -> dict:
        location = -item.at if (item.for_reverse and not item.for_nominal) else item.at
        out = {"group": self.ival(item.group), "at": self.num(item.at),
               "for_nominal": z3.BoolVal(item.for_nominal, self.ctx),
               "for_reverse": z3.BoolVal(item.for_reverse, self.ctx), "location": self.num(location)}
        if self.pack.scope.groups >= 2:     # what the onboard knows of the item's group (DESIGN 4.10)
            n = f"g{item.group}"
            out.update({"remembered": self.terms[f"{n}.remembered"],
                        "link_position": self.terms[f"{n}.link_position"],
                        "link_orientation": self.terms[f"{n}.link_orientation"]})
        return out

    def info_term(self, info_id: str, field: str):
        item = self.pack.info(info_id)
        data = self.item_terms(item)
        if field in data:
            return data[field]
        if field == "ahead":
            return self.along(self.name("actual.orientation"), self.info_term(info_id, "real") - self.name("actual.front"))
        if field in ("est_ahead", "max_safe_ahead", "min_safe_ahead"):
            est = self.along(self.name("est.orientation"), self.info_term(info_id, "position") - self.name("est.front"))
            if field == "max_safe_ahead":
                return est - self.name("est.l_doubtunder")
            return est + self.name("est.l_doubtover") if field == "min_safe_ahead" else est
        if field == "real" and ("real", info_id) in self._memo:
            return self._memo[("real", info_id)]
        if field == "real":
            # a one-way item at its place in its group's frame; a both-ways item `at` from its
            # group along the train's real orientation (DESIGN 4.9)
            both = item.for_nominal and item.for_reverse
            o = self.name("actual.orientation")          # in the current LRBG's frame
            if self.pack.scope.groups == 1:
                return self.along(o, data["at"]) if both else data["location"]
            R = self._route
            f, x0 = R["frame"], R["origin"]            # the current frame in G1's
            xa = R["marks"][item.group - 1]
            if both:                                    # `at` ahead of its group, along the orientation
                x = xa + self.along(f, self.along(o, data["at"]))
            else:
                sa = 1 if item.group == 1 else self.terms[f"g{item.group}.orientation"]
                x = xa + (data["location"] if item.group == 1 else self.along(sa, data["location"]))
            real = self.define(f"info.{info_id}.real", self.along(f, x - x0))
            self._memo[("real", info_id)] = real
            return real
        key = (("onboard", f"info_{field}"), info_id)
        if key not in self._memo:
            formula = self.pack.definition(key[0])
            term = self.expr(formula.node, {ITEM: data})
            sort = "bool" if formula.node.ty == "Bool" else "real"
            self._memo[key] = self.define(f"onboard.info_{field}.{info_id}", term, sort)
        return self._memo[key]

    def value_term(self, ty: str, value):
        """A constant of a finite type (a parameter's value, DESIGN 4.7)."""
        if ty == "Direction":
            return self.ival(_DIR_CODE[value])
        if ty == "Running":
            return z3.BoolVal(value is Running.FORWARD, self.ctx)
        return z3.BoolVal(bool(value), self.ctx)

    def body_term(self, fam, fields: dict, valuation: tuple):
        """An accumulator's body for one leg (``fields``) and one value of its parameters."""
        over = {id(p): self.value_term(p.ty, v) for p, v in zip(fam.params, valuation)}
        return self.expr(fam.body, {fam.var: fields, OVERRIDE: over})

    def _dummy(self, field):
        ty = LEG[field].ty
        self._fresh += 1
        if ty == "Bool" or ty == "Running":
            return self.boolean(f"{self.prefix}absent!{self._fresh}")
        if ty in ("Count", "Direction"):
            return self.int(f"{self.prefix}absent!{self._fresh}")
        return self.real(f"{self.prefix}absent!{self._fresh}")

    def expr(self, node: ast.Node, env: dict):
        """The z3 term of a typed expression; ``env`` binds leg variables to their fields (and
        :data:`OVERRIDE` to terms that replace given sub-terms, by identity)."""
        e = self.expr
        over = env.get(OVERRIDE)
        if over is not None and id(node) in over:
            return over[id(node)]
        if isinstance(node, ast.Num):
            if node.ty in (COUNT, ZERO):
                return self.ival(int(node.value))
            return self.num(node.value)
        if isinstance(node, ast.BoolLit):
            return z3.BoolVal(node.value, self.ctx)
        if isinstance(node, ast.Name):
            kind = node.ref[0]
            if kind == "var":
                return self.name(node.ref[1])
            if kind == "num":
                v = node.ref[1]
                return self.ival(int(v)) if node.ty == COUNT else self.num(v)
            if kind == "const":
                v = node.ref[1]
                if isinstance(v, Running):
                    return z3.BoolVal(v is Running.FORWARD, self.ctx)
                return self.ival(_DIR_CODE[v])
            if kind == "let":
                return self.definition(("let", node.ref[1]))
            if kind == "leg":
                return env[node.ref[1]][node.ref[2]]
            if kind == "legat":
                return self.leg_field(node.ref[1], node.ref[2])
            if kind == "item":
                return env[ITEM][node.ref[1]]
            if kind == "info":
                return self.info_term(node.ref[1], node.ref[2])
            raise AssertionError(node.ref)
        if isinstance(node, ast.Unary):
            x = e(node.operand, env)
            return z3.Not(x) if node.op == "not" else -x
        if isinstance(node, ast.Binary):
            op = node.op
            a, b = e(node.left, env), e(node.right, env)
            if op == "and":
                return z3.And(a, b)
            if op == "or":
                return z3.Or(a, b)
            if op == "implies":
                return z3.Implies(a, b)
            if op == "+":
                return a + b
            if op == "-":
                return a - b
            if op == "*":
                # one side is constant (checked): fold it to a numeral so the term stays linear
                if _is_const(node.left):
                    return z3.simplify(a) * b
                return a * z3.simplify(b)
            return a * z3.simplify(1 / z3.ToReal(b) if z3.is_int(b) else 1 / b)
        if isinstance(node, ast.Chain):
            vals = [e(o, env) for o in node.operands]
            parts = [ast.COMPARISONS[op](a, b) for op, a, b in zip(node.ops, vals, vals[1:])]
            return parts[0] if len(parts) == 1 else z3.And(parts)
        if isinstance(node, ast.IfThen):
            return z3.If(e(node.cond, env), e(node.then, env), e(node.orelse, env))
        if isinstance(node, ast.Call):
            args = [e(a, env) for a in node.args]
            f = node.func
            if f == "abs":
                return z3.If(args[0] >= 0, args[0], -args[0])
            if f in ("min", "max"):
                out = args[0]
                for a in args[1:]:
                    out = z3.If(a < out, a, out) if f == "min" else z3.If(a > out, a, out)
                return out
            if f == "flip":
                return -args[0]
            if f == "side":
                return z3.If(args[0] >= 0, 1, -1)
            if f == "along":
                return self.along(args[0], args[1])
            x, step = args
            step = z3.simplify(z3.ToReal(step) if z3.is_int(step) else step)
            inv = z3.simplify(1 / step)
            if f == "floor_to":
                k = self.floor_int(x * inv)
            elif f == "ceil_to":
                k = -self.floor_int(-x * inv)
            else:
                k = self.floor_int(x * inv + self.num("1/2"))
            return z3.ToReal(k) * step
        if isinstance(node, ast.Quant):
            return self.quantify(node, env)
        raise AssertionError(type(node))

    # ---- rules ------------------------------------------------------------------------------
    def given(self, rule: Rule):
        """The rule's given with its implicit premise (legs.count >= i for every legs[i])."""
        parts = []
        if rule.premise_legs:
            parts.append(self.terms["legs.count"] >= rule.premise_legs)
        if rule.given is not None:
            parts.append(self.expr(rule.given.node, {}))
        return z3.And(parts) if parts else z3.BoolVal(True, self.ctx)

    def expect(self, rule: Rule):
        return self.expr(rule.expect.node, {})


class Encoding(Terms):
    """The world of one pack, up to ``bound`` legs, in one z3 context."""

    def __init__(self, pack: Pack, bound: int, ctx: z3.Context, prefix: str = "",
                 world: Scope | None = None):
        self._setup(pack, ctx, prefix, [])
        if world is not None:       # the real world's bounds, when they differ from the pack's
            self.world = world
        self.K = bound
        self.inputs: dict = {}         # input name -> z3 constant (for models and the ladder)
        groups = pack.scope.groups
        S = self._static()
        count = self.int("legs.count")
        self.inputs["legs.count"] = count
        self.constraints += [count >= 0, count <= bound]
        Gs = [self._group_inputs(k) for k in range(2, groups + 1)]
        self._route = {"frame": self.ival(1), "origin": self.num(0), "marks": [self.num(0)]}
        if Gs:
            self._marks(Gs)
        st = self._first(S)
        phys = []
        for i in range(1, bound + 1):
            cab, fwd = self.boolean(f"legs.{i}.cab_change"), self.boolean(f"legs.{i}.forward")
            dist, odo = self.real(f"legs.{i}.distance"), self.real(f"legs.{i}.odometer")
            self.inputs.update({f"legs.{i}.cab_change": cab, f"legs.{i}.running": fwd,
                                f"legs.{i}.distance": dist, f"legs.{i}.odometer": odo})
            active = count >= i
            # an inactive leg is fixed, so that models (and minimal worlds) are canonical
            self.constraints.append(z3.Implies(z3.Not(active), z3.And(z3.Not(cab), fwd, dist == 0, odo == 0)))
            phys.append((cab, fwd, dist, odo))
            if not Gs:      # one group: each leg as it comes (the constraints in the order they always had)
                st, fields = self._step(S, st, phys[-1], active=active, index=self.ival(i), tag=str(i))
                self.legs.append(fields)
        self._passage_bound(S)
        if not Gs:
            self._names(S, st, count)
            self._group_names(S, [], count)
            return
        self._route_pass(S, st, Gs, phys, count)

    # ---- a route: one pass over the legs, the current LRBG changing on the way (DESIGN 4.10) ----
    def _route_pass(self, S1: dict, st: dict, Gs: list, phys: list, count) -> None:
        """The legs in order, each in the frame of the LRBG current during it; at the end of each
        leg the group found there (if any) is judged from that LRBG and, when it becomes the
        LRBG, the state restarts at its detection. Where a group is found on the ground is
        written in G1's frame, from the real train of the current LRBG's frame."""
        ctx, num, K = self.ctx, self.num, len(phys)
        cur = {"S": S1, "start": self.ival(0), "origin": num(0), "frame": self.ival(1),
               "group": self.ival(1), "previous": self.ival(0), "linked": z3.BoolVal(True, ctx)}
        acc_at = {k: [] for k in range(2, len(Gs) + 2)}     # per group: (accepted at leg i) terms
        win_at = {k: [] for k in range(2, len(Gs) + 2)}
        qlegs, fields_by_leg = [], []
        for i, leg in enumerate(phys, 1):
            fwd = leg[1]
            st, fields = self._step(cur["S"], st, leg, active=count >= i, index=self.ival(i) - cur["start"], tag=str(i))
            fields_by_leg.append(fields)
            # the real train in G1's frame, from the current LRBG's (one computation of the truth)
            real = {"front": cur["origin"] + self.along(cur["frame"], st["front"]),
                    "o": self.along(cur["frame"], st["o"]), "motion": self.along(cur["frame"], st["motion"])}
            # the group detected at the end of this leg, judged from the current LRBG
            events = []
            for k, G in enumerate(Gs, 2):
                here = z3.And(G["found"], G["at"] == i)
                self._detected(k, G, here, real, leg, S1["train.antenna"])
                ok, window, S_k = self._judge(k, G, cur, st, fwd, i)
                acc_at[k].append(z3.And(here, ok))
                win_at[k].append(z3.And(here, window))
                events.append((z3.And(here, ok), k, S_k))
            cur, st = self._restart(cur, st, events, i)
        for k, G in enumerate(Gs, 2):
            self.constraints.append(G["lrbg"] == (z3.Or(acc_at[k]) if acc_at[k] else z3.BoolVal(False, ctx)))
            G["in_window"] = self.define(f"g{k}.in_window", z3.Or(win_at[k]) if win_at[k] else z3.BoolVal(False, ctx), "bool")
        start = cur["start"]
        count2 = self.define("legs.count@current", count - start, "int")
        # the legs since the current LRBG: quantifiers read the physical legs after its detection,
        # legs[j] (and the per-leg values) the j-th of them
        for i, fields in enumerate(fields_by_leg, 1):
            q = dict(fields)
            q["active"] = z3.And(count >= i, start < i)
            q["index"] = self.ival(i) - start
            qlegs.append(q)
        self.qlegs = qlegs
        self.legs = []
        for j in range(1, K + 1):
            sel = {}
            for f in fields_by_leg[0]:
                chosen = None
                for i in range(K, j - 1, -1):
                    v = fields_by_leg[i - 1][f]
                    chosen = v if chosen is None else z3.If(start + j == i, v, chosen)
                sel[f] = chosen
            sel["active"] = count2 >= j
            sel["index"] = self.ival(j)
            self.legs.append(sel)
        self._route.update({"frame": cur["frame"], "origin": cur["origin"], "group": cur["group"],
                            "previous": cur["previous"]})
        self._names(cur["S"], st, count2)
        self._group_names(S1, Gs, count)

    # ---- the route's later groups (DESIGN 4.8, 4.10) ------------------------------------------
    def _group_inputs(self, k: int) -> dict:
        """Later group ``k`` of the bounded encoding: its static inputs, and whether and at the
        end of which leg it is found, with what detection error."""
        sc, C, n = self.world, self.constraints, f"g{k}"
        num = self.num
        g = self._group_static(k, {"found": self.boolean(f"{n}.found"), "at": self.int(f"{n}.at"),
                                   "detect_error": self.real(f"{n}.detect_error")})
        self.bounded("world.detection", g["detect_error"] >= -num(sc.detection),
                     g["detect_error"] <= num(sc.detection))
        C += [
            z3.Implies(z3.Not(g["found"]), z3.And(g["at"] == 0, g["detect_error"] == 0)),
            z3.Implies(g["found"], z3.And(g["at"] >= 1, g["at"] <= self.inputs["legs.count"]))]
        if k > 2:           # found in route order, at different legs (DESIGN 4.10)
            for j in range(2, k):
                before = self.inputs[f"g{j}.at"]
                C.append(z3.Implies(z3.And(g["found"], self.inputs[f"g{j}.found"]), before < g["at"]))
        g["lrbg"] = self.boolean(self.prefix + f"{n}.lrbg")   # defined by _handover
        return g


def _is_const(node: ast.Node) -> bool:
    if isinstance(node, ast.Num):
        return True
    if isinstance(node, ast.Name):
        return node.ref[0] == "num"
    if isinstance(node, ast.Unary):
        return _is_const(node.operand)
    if isinstance(node, ast.Binary) and node.op in "+-*/":
        return _is_const(node.left) and _is_const(node.right)
    if isinstance(node, ast.Call) and node.func in ("abs", "min", "max"):
        return all(_is_const(a) for a in node.args)
    return False
