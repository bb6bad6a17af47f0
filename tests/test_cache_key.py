"""The cache key moves with every field an obligation is built from, and with nothing else.

A stale ``holds`` once came from a key that left out the ``[[info]]`` items. These tests edit
every key a pack may hold (each table's schema comes from the loader itself, so a key added to
the language without an edit here fails ``test_every_pack_key_has_an_edit``) and check, for the
keys that can change a verdict, that the rule's key moves; for the cosmetic ones, that it stays.
A cache hit needs an equal key (``Cache.get`` looks a result up by key alone), so a moved key is
a recomputed verdict; the end-to-end tests below show that on the cases that went wrong.
"""

from __future__ import annotations

import copy
import json

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from verifier.run.cache import Cache, induction_key, rule_key
from verifier.check.typer import check_pack
from verifier.api import CheckOptions, check_packs
from verifier.lang.pack import TABLES, parse_pack_text
from verifier.lang import vocab

# A two-group pack with every table filled in, whose one rule reaches every definition: the
# let, the parameter, the information item, every onboard output (through report.*), every
# trackside output and both item formulas.
BASE = {
    "pack": {"name": "keyed", "title": "Keyed pack", "legs": 1, "description": "for the key tests"},
    "world": {
        "balises": [1, 8], "locacc": ["0 m", "12 m"], "train_length": ["20 m", "400 m"],
        "antenna": ["2 m", "30 m"], "leg_distance": ["0 m", "900 m"],
        "odometry_over": {"fixed": "5 m", "rate": "5 %"},
        "odometry_under": {"fixed": "5 m", "rate": "5 %"},
        "detection": "1 m", "odometry_basis": "measured", "groups": 4, "history": 3,
        "g2_distance": ["100 m", "700 m"], "g2_side": "any", "g2_orientation": "any",
        "g2_balises": [1, 8], "g2_locacc": ["0 m", "8 m"],
    },
    # a route (DESIGN 4.10): G3 described, G4 left to the defaults
    "group": [{"number": 3, "title": "G3", "distance": ["100 m", "800 m"], "orientation": "any",
               "balises": [1, 8], "locacc": ["0 m", "8 m"]}],
    "params": {"margin": "10 m"},
    "let": {"short": "train.length <= 300 m", "unused": "train.length >= 30 m"},
    "onboard": {**{k: v for k, v in vocab.DEFAULT_ONBOARD.items()},
                **{k: v for k, v in vocab.DEFAULT_INFO_TWO.items()},
                "q_scale": "1 m", "rounding": "widen"},
    "trackside": dict(vocab.DEFAULT_TRACKSIDE),
    "implementation": {"onboard": "kestrel_onboard:report", "path": "examples"},
    "info": [{"id": "sig", "title": "Signal", "group": 1, "at": "400 m", "valid": "reverse"}],
    "lemma": [{"id": "lem", "title": "A lemma", "given": "rbc.placed",
               "expect": "rbc.l_doubtover >= 0 m", "refs": ["SUBSET-026 3.6.4"], "note": "n"}],
    "rule": [{"id": "r", "title": "The rule", "refs": ["SUBSET-026 3.6.4"], "note": "a note",
              "legs": 1,
              "given": "short and rbc.placed and info.sig.accepted",
              "expect": ("info.sig.position >= -500 m - params.margin and rbc.min_safe_rear <= rbc.max_safe_front"
                         " + 10000 m and rbc.min_safe_front <= rbc.est_front + 10000 m"
                         " and report.code.d_lrbg >= 0 and g2.distance >= 0 m")},
              {"id": "other", "title": "Another rule", "expect": "train.length >= 10 m"}],
}

# (table, key) -> a new value that keeps the pack valid. KEEP: edits that must not move the key.
WORLD_EDITS = {
    "balises": [1, 7], "locacc": ["0 m", "11 m"], "train_length": ["20 m", "390 m"],
    "antenna": ["3 m", "30 m"], "leg_distance": ["0 m", "800 m"],
    "odometry_over": {"fixed": "4 m", "rate": "5 %"}, "odometry_under": {"fixed": "5 m", "rate": "4 %"},
    "detection": "2 m", "odometry_basis": "real", "detection_in_odometry": True,
    "groups": None,   # groups: see _edit
    "g2_distance": ["100 m", "600 m"], "g2_side": "nominal", "g2_orientation": "same",
    "g2_balises": [2, 8], "g2_locacc": ["0 m", "7 m"], "history": 2,
}
GROUP_EDITS = {"number": 4, "distance": ["100 m", "900 m"], "orientation": "opposite",
               "balises": [2, 8], "locacc": ["0 m", "9 m"]}
EDITS = {
    **{("world", k): v for k, v in WORLD_EDITS.items()},
    ("pack", "legs"): 2,
    ("params", "margin"): "11 m",
    ("params", "extra"): "1 m",                  # a new parameter: conservative, the key moves
    ("let", "short"): "train.length <= 290 m",
    **{("onboard", k): f"({v})" for k, v in BASE["onboard"].items() if k not in ("q_scale", "rounding")},
    ("onboard", "q_scale"): "10 cm",
    ("onboard", "rounding"): "nearest",
    **{("trackside", k): f"({v})" for k, v in BASE["trackside"].items()},
    ("info", "id"): "sig2",                      # renames it: the rule follows (see _edit)
    ("info", "group"): 2,
    ("info", "at"): "600 m",
    ("info", "valid"): "both",
    ("rule", "given"): "short and rbc.placed and info.sig.accepted and train.length >= 21 m",
    ("rule", "expect"): BASE["rule"][0]["expect"] + " and train.length >= 5 m",
    ("rule", "legs"): 2,
    **{("group", k): v for k, v in GROUP_EDITS.items()},
}
KEEP = {
    ("group", "title"): "Another title",
    ("pack", "name"): "keyed-renamed", ("pack", "title"): "Another title",
    ("pack", "description"): "other words", ("let", "unused"): "train.length >= 40 m",
    ("rule", "id"): "renamed", ("rule", "title"): "Another title", ("rule", "refs"): ["SUBSET-026 7"],
    ("rule", "note"): "another note", ("info", "title"): "Another title",
    ("implementation", "onboard"): "kestrel_onboard_buggy:report",
    ("implementation", "path"): "elsewhere",
    ("implementation", "trackside"): "kestrel_trackside:positions",
    ("lemma", "id"): "lem2", ("lemma", "title"): "t", ("lemma", "given"): "true",
    ("lemma", "expect"): "rbc.l_doubtover >= 1 m", ("lemma", "refs"): [], ("lemma", "note"): "m",
}
# the lemma's own fields move the key of the induction step, not the rule's bounded key
LEMMA_EDITS = {("lemma", k) for k in ("given", "expect")}


def _toml_value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, (int, str)):
        return json.dumps(v)
    if isinstance(v, list):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{ " + ", ".join(f"{k} = {_toml_value(x)}" for k, x in v.items()) + " }"
    raise TypeError(v)


def _render(doc: dict) -> str:
    out = []
    for table, body in doc.items():
        items = body if isinstance(body, list) else [body]
        for item in items:
            out.append(f"[[{table}]]" if isinstance(body, list) else f"[{table}]")
            out += [f"{k} = {_toml_value(v)}" for k, v in item.items()]
            out.append("")
    return "\n".join(out)


def _edit(doc: dict, table: str, key: str, value) -> dict:
    doc = copy.deepcopy(doc)
    if (table, key) == ("world", "groups"):       # one group: drop the route and what reads it
        doc["world"] = {k: v for k, v in doc["world"].items() if not k.startswith(("g2_", "groups", "history"))}
        doc.pop("group", None)
        doc["onboard"].update(vocab.DEFAULT_INFO_ONE)
        doc["rule"][0]["expect"] = doc["rule"][0]["expect"].replace(" and g2.distance >= 0 m", "")
        return doc
    if (table, key) == ("info", "id"):
        for part in ("given", "expect"):
            doc["rule"][0][part] = doc["rule"][0][part].replace("info.sig.", f"info.{value}.")
    body = doc[table]
    (body[0] if isinstance(body, list) else body)[key] = value
    return doc


def _pack(doc: dict):
    return check_pack(parse_pack_text(_render(doc), "keyed.toml"))


def _keys(doc: dict) -> tuple:
    pack = _pack(doc)
    rule = pack.rules[0]
    return (rule_key(pack, rule, pack.bound_for(rule)),
            induction_key(pack, rule, pack.lemmas, pack.bound_for(rule), 1))


BASE_KEYS = None


def _base_keys():
    global BASE_KEYS
    if BASE_KEYS is None:
        BASE_KEYS = _keys(BASE)
    return BASE_KEYS


def test_every_pack_key_has_an_edit():
    """Each key of each table the loader accepts is edited by a test here (free-name tables:
    at least one name). A key added to the language must be added here too."""
    covered = set(EDITS) | set(KEEP)
    for table, keys in TABLES.items():
        if keys is None:
            assert any(t == table for t, _ in covered), table
            continue
        missing = {k for k in keys if (table, k) not in covered}
        assert not missing, f"[{table}] keys with no edit in this test: {sorted(missing)}"


@pytest.mark.parametrize("where", sorted(EDITS), ids=lambda w: f"{w[0]}.{w[1]}")
def test_an_edit_that_can_change_the_verdict_moves_the_key(where):
    table, key = where
    assert _keys(_edit(BASE, table, key, EDITS[where]))[0] != _base_keys()[0]


@pytest.mark.parametrize("where", sorted(KEEP), ids=lambda w: f"{w[0]}.{w[1]}")
def test_a_cosmetic_edit_keeps_the_bounded_key(where):
    table, key = where
    rule_k, step_k = _keys(_edit(BASE, table, key, KEEP[where]))
    assert rule_k == _base_keys()[0]
    if where in LEMMA_EDITS:
        assert step_k != _base_keys()[1]       # the step assumes the lemma: its key moves


@settings(max_examples=40, deadline=None)
@given(st.lists(st.sampled_from(sorted(EDITS) + sorted(KEEP)), min_size=1, max_size=4, unique=True))
def test_any_combination_of_edits_moves_the_key_iff_one_can_change_the_verdict(edits):
    # renaming the item and dropping G2 rewrite the rule's text: they go last, and a G2 key is
    # not edited in a pack that loses G2
    late = [w for w in (("info", "id"), ("world", "groups")) if w in edits]
    doc = BASE
    for where in [w for w in edits if w not in late] + late:
        if ("world", "groups") in edits and (where[0] == "group" or (
                where[0] == "world" and where[1].startswith(("g2_", "history")))):
            continue
        doc = _edit(doc, *where, EDITS.get(where, KEEP.get(where)))
    semantic = any(w in EDITS for w in edits if not (("world", "groups") in edits and (
        w[0] == "group" or (w[0] == "world" and w[1].startswith(("g2_", "history"))))))
    assert (_keys(doc)[0] != _base_keys()[0]) == semantic


def test_command_line_settings_move_the_key():
    pack = _pack(BASE)
    rule = pack.rules[0]
    k = rule_key(pack, rule, 1)
    assert rule_key(pack, rule, 2) != k                            # --legs
    assert rule_key(pack, rule, 1, witness=False) != k             # witness asked or not
    assert induction_key(pack, rule, pack.lemmas, 1, 1) != induction_key(pack, rule, pack.lemmas, 1, 2)   # --induction-depth
    assert induction_key(pack, rule, pack.lemmas, 1, 1) != induction_key(pack, rule, (), 1, 1)           # lemmas assumed


INFO_PACK = """[pack]
name = "infopack"
title = "t"
legs = 1
[[info]]
id = "sig"
title = "s"
group = 1
at = "{at}"
valid = "reverse"
[[rule]]
id = "r"
title = "r"
given = "passage.seen != unknown"
expect = "info.sig.accepted implies info.sig.position >= -500 m"
"""


def _check(text: str, cache):
    pack = check_pack(parse_pack_text(text, "infopack.toml"))
    (res,) = check_packs([pack], CheckOptions(out=None, cache=cache))
    return res.results[0]


def test_editing_an_information_item_is_never_answered_from_the_cache(tmp_path):
    """The case that went wrong: a reverse-only item at 400 m holds the bound -500 m; moved to
    600 m it breaks it (hand-worked: a reverse-only item lies at -at in its group's frame)."""
    first = _check(INFO_PACK.format(at="400 m"), Cache(tmp_path))
    assert (first.verdict, first.cached) == ("holds", False)
    again = _check(INFO_PACK.format(at="400 m"), Cache(tmp_path))
    assert (again.verdict, again.cached) == ("holds", True)         # the cache is in use
    edited = _check(INFO_PACK.format(at="600 m"), Cache(tmp_path))
    assert (edited.verdict, edited.cached) == ("violated", False)


def test_a_shipped_pack_edit_of_an_item_validity_is_solved_again(tmp_path):
    """The second case: rules/relocation.toml with the shunting limit made valid both ways was
    answered from an entry of the unedited pack and ended in an internal disagreement."""
    text = open("rules/relocation.toml", encoding="utf-8").read()
    rule_id = "reverse-only-information-not-for-a-train-facing-nominal"
    pack = check_pack(parse_pack_text(text, "rules/relocation.toml"))
    opts = CheckOptions(out=None, cache=Cache(tmp_path), rules=(rule_id,), legs=1)
    (before,) = check_packs([pack], opts)
    edited_text = text.replace('valid = "reverse"', 'valid = "both"', 1)
    assert edited_text != text
    edited = check_pack(parse_pack_text(edited_text, "rules/relocation.toml"))
    (after,) = check_packs([edited], opts)
    assert not after.results[0].cached
    assert after.results[0].verdict != "error"
    assert before.results[0].verdict == "holds"


def test_an_interrupt_while_storing_leaves_no_temporary_file(tmp_path, monkeypatch):
    """Ctrl-C between the temporary file and the rename: nothing half-written stays behind."""
    import os

    from verifier.smt.solve import Solved
    cache = Cache(tmp_path)

    def interrupted(*_):
        raise KeyboardInterrupt
    monkeypatch.setattr(os, "replace", interrupted)
    with pytest.raises(KeyboardInterrupt):
        cache.put("c" * 64, Solved("holds", world=None, minimal=True), witness=False)
    assert [p for p in tmp_path.rglob("*") if p.is_file()] == []
