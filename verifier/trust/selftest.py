"""``verifier selftest --report DIR``: the tool validation dossier.

One document (``DIR/validation.md``, with the data in ``DIR/validation.json``) that gathers the
evidence for accepting the tool (EN 50128 tool class T2: a tool that can fail to reveal a
defect, but cannot put one into the product): the versions used, the differential run of the
simulator against the SMT encoding, the second-solver re-check of every obligation, the
seeded-mutant report and the fuzz summary. Each part states its acceptance criterion and
whether it was met. The tool checks rules against a stated model, not a real train; this
dossier supports, and never replaces, the tool qualification of the railway's own process.
"""

from __future__ import annotations

import json
import platform
import time
from pathlib import Path

import attrs

from verifier.about import CAUTION, __version__
from verifier.api import CheckOptions, check_packs
from verifier.run.loader import load_pack
from verifier.trust.crosscheck import crosscheck_results
from verifier.trust.differential import catalogue, run_differential
from verifier.trust.fuzz import run_fuzz
from verifier.trust.mutate import run_catalogue


def versions() -> dict:
    from importlib.metadata import PackageNotFoundError, version
    out = {"verifier": __version__, "python": platform.python_version(), "platform": platform.platform()}
    for dist in ("z3-solver", "cvc5", "hypothesis", "lark", "attrs"):
        try:
            out[dist] = version(dist)
        except PackageNotFoundError:
            out[dist] = "not installed"
    try:
        import subprocess
        rev = subprocess.run(["git", "rev-parse", "HEAD"], capture_output=True, text=True,
                             cwd=Path(__file__).resolve().parent, timeout=10)
        if rev.returncode == 0:
            out["git"] = rev.stdout.strip()
    except (OSError, subprocess.SubprocessError):
        pass
    return out


@attrs.frozen
class Plan:
    """What the self-test runs (the defaults are the validation profile's)."""

    catalogue: tuple            # pack files for the differential run and the re-check
    mutant_packs: tuple         # pack files whose design is mutated
    worlds: int
    fuzz: int
    seed: int
    workers: int = 2
    second_timeout: float = 30.0
    mutant_timeout: float = 20.0


def default_plan(root: Path = Path("."), profile_name: str | None = None) -> Plan:
    from verifier.trust.strategies import profile
    prof = profile(profile_name)
    paths = tuple(catalogue((root / "rules", root / "tests" / "packs")))
    shipped = tuple(p for p in catalogue((root / "rules",)) if "/demo/" not in p)
    seed = prof["seed"] if prof["seed"] is not None else int(time.time())
    return Plan(paths, shipped, prof["worlds"], prof["fuzz"], seed, prof["workers"])


def run(plan: Plan, out_dir: Path, progress=print, executor=None) -> dict:
    """Run every part of the plan and write the dossier; return its data. ``executor`` (an
    :class:`~verifier.run.executor.ExecutorSpec`, e.g. a Dask cluster) runs the differential
    sweep's batches and the mutants; the dossier does not depend on it."""
    t0 = time.monotonic()
    data: dict = {"versions": versions(), "plan": attrs.asdict(plan)}

    progress(f"selftest: differential run, {plan.worlds} worlds")
    diff = run_differential(plan.catalogue, plan.worlds, seed=plan.seed, workers=plan.workers,
                            executor=executor)
    data["differential"] = {**diff.as_json(), "passed": not diff.failures}

    progress("selftest: verdicts and second-solver re-check of every obligation")
    packs = [load_pack(p) for p in plan.catalogue]
    opts = CheckOptions(out=None, timeout=plan.second_timeout)
    # one pack at a time: check_packs keys by pack name, and the test catalogue holds several
    # versions of one pack under one name (for verifier diff)
    results = [r for pack in packs for r in check_packs([pack], opts)]
    results, cross = crosscheck_results(packs, results, opts, second_timeout=plan.second_timeout)
    c = cross.counts()
    data["crosscheck"] = {**cross.as_json(), "passed": c["disagreements"] == 0}

    progress("selftest: seeded mutants")
    mut = run_catalogue([load_pack(p) for p in plan.mutant_packs], timeout=plan.mutant_timeout,
                        executor=executor)
    ratio = mut.ratio()
    data["mutants"] = {**mut.as_json(), "passed": ratio is not None and ratio >= 0.90,
                       "survivors": [{"mutant": r.mutant.describe(), "status": r.status, "why": r.by}
                                     for r in mut.survivors()]}

    progress(f"selftest: fuzzing, {plan.fuzz} inputs")
    fz = run_fuzz(plan.fuzz, plan.seed, plan.catalogue, workers=plan.workers)
    data["fuzz"] = {**fz.as_json(), "passed": not fz.failures and fz.share("type-checker") >= 0.30
                    and fz.share("solver") >= 0.10}
    data["seconds"] = round(time.monotonic() - t0, 1)
    data["passed"] = all(data[k]["passed"] for k in ("differential", "crosscheck", "mutants", "fuzz"))
    out_dir.mkdir(parents=True, exist_ok=True)
    (out_dir / "validation.json").write_text(json.dumps(data, indent=2, sort_keys=True, default=str) + "\n")
    (out_dir / "validation.md").write_text(render(data))
    return data


def _ok(flag: bool) -> str:
    return "met" if flag else "NOT MET"


def render(d: dict) -> str:
    v = d["versions"]
    lines = ["# verifier tool validation dossier", "",
             f"Overall: **{'all acceptance criteria met' if d['passed'] else 'some criteria NOT met'}** "
             f"({d['seconds']} s).", "", f"> {CAUTION}", "",
             "Evidence for classifying and accepting `verifier` as a T2 tool (EN 50128): it can "
             "fail to reveal a defect in a design but cannot introduce one into the product. Each "
             "part below is an independent attempt to catch the tool being wrong.", "",
             "## Versions", ""]
    lines += [f"- {k}: {v[k]}" for k in sorted(v)]
    df = d["differential"]
    lines += ["", "## 1. Simulator against SMT encoding (differential)", "",
              "Criterion: equal values for every vocabulary name, per-leg field, let, and every "
              "rule's given and expect, on every generated world. " + _ok(df["passed"]) + ".", "",
              f"- worlds: {df['worlds']} (seeds {df['seeds']}), packs: {len(df['packs'])}, "
              f"rule evaluations: {df['rule_checks']}, values compared: {df['values_compared']}, "
              f"uniqueness proofs: {df['unique_checks']}, {df['seconds']:.0f} s",
              "- corner hits:", ""]
    lines += [f"  - {name}: {n}" for name, n in df["corners"].items()]
    for f in df["failures"]:
        lines += ["", f"Failure in pack {f['pack']}: " + "; ".join(f["differences"]),
                  "", "```json", json.dumps(f["world"], indent=2, sort_keys=True), "```"]
    xc = d["crosscheck"]
    c = xc["counts"]
    lines += ["", "## 2. Same obligation, second solver; boundary replay", "",
              "Criterion: no disagreement (a second solver's undecided answer is recorded, not "
              "counted as agreement). " + _ok(xc["passed"]) + ".", ""]
    lines += [f"- {x}" for x in xc["checks"]]
    lines += [f"- {c['rules']} rules, {c['obligations']} obligations: {c['second_agree']} agreed, "
              f"{c['second_undecided']} undecided, {c['second_disagree']} disagreed; "
              f"{c['boundary_worlds']} boundary worlds replayed; {c['disagreements']} disagreements"]
    for r in xc["rules"]:
        if r["problems"] or "unknown" in r["second"].values():
            lines.append(f"  - {r['pack']}/{r['id']} ({r['verdict']}): second solver "
                         f"{r['second']}" + ("; " + "; ".join(r["problems"]) if r["problems"] else ""))
    slow = [(r, k, h["text"]) for r in xc["rules"] for k, h in sorted(r.get("second_how", {}).items())
            if h["cases"] > 1 or h["options"]]
    if slow:
        lines += ["", "Obligations cvc5 decided only with ite-simp or by cases (the others: with its "
                  "defaults, whole):", ""]
        lines += [f"- {r['pack']}/{r['id']} ({k}): {h}" for r, k, h in slow]
    mu = d["mutants"]
    mc = mu["counts"]
    ratio = mu["ratio"]
    lines += ["", "## 3. Seeded mutants of the shipped designs", "",
              "Criterion: the shipped packs (demos excluded: their designs are wrong on purpose) "
              "kill at least 90 % of the mutants that load and are not proved equivalent. "
              + _ok(mu["passed"]) + ".", "",
              f"- {sum(mc.values())} distinct mutants: {mc['killed']} killed, {mc['survived']} "
              f"survived, {mc['undecided']} undecided, {mc['equivalent']} equivalent, "
              f"{mc['invalid']} invalid; kill ratio "
              + (f"{100 * ratio:.1f} %" if ratio is not None else "n/a"), "", "Survivors:", ""]
    lines += [f"- {s['status']}: {s['mutant']} ({s['why']})" for s in mu["survivors"]] or ["- none"]
    fz = d["fuzz"]
    lines += ["", "## 4. Fuzzed input", "",
              "Criterion: every input ends in a clean error or a verdict (no crash, hang or file "
              "written); at least 30 % reach the type checker and 10 % the solver. "
              + _ok(fz["passed"]) + ".", "",
              f"- {fz['inputs']} inputs (seed {fz['seed']}), shares reached: "
              + ", ".join(f"{k} {100 * s:.1f} %" for k, s in fz["shares"].items()),
              f"- results: {fz['results']}", f"- slowest input {fz['slowest']:.2f} s"]
    for f in fz["failures"][:20]:
        lines.append(f"  - {f[2]} ({f[0]}, stage {f[1]}): {f[3]}")
    return "\n".join(lines) + "\n"
