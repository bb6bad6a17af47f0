import re
from pathlib import Path

from verifier.lang import vocab
from verifier.run.loader import load_all

ROOT = Path(__file__).resolve().parent.parent


def test_vocabulary_doc_is_generated_from_the_tables():
    assert (ROOT / "docs" / "vocabulary.md").read_text() == vocab.markdown()


def test_readme_quick_start_has_exactly_two_commands():
    text = (ROOT / "README.md").read_text()
    block = text.split("## Quick start", 1)[1].split("```sh\n", 1)[1].split("```", 1)[0]
    commands = [line for line in block.splitlines() if line.strip()]
    assert len(commands) == 2
    assert "verifier check rules/" in commands[0] and "pytest" in commands[1]
    assert "EN 50126/50128/50129" in text


def test_docs_speak_to_users():
    # docs/ is for users: no issue numbers they cannot see, no instructions to contributors
    # (those are in DEVELOPERS.md)
    for path in sorted((ROOT / "docs").glob("*.md")) + [ROOT / "README.md"]:
        text = path.read_text()
        found = re.findall(r"(?i)\bissues? \d+|closing note|the issues say", text)
        assert not found, (path.name, found)


def test_readme_sample_marks_every_line_it_leaves_out():
    # the sample's rows are those of `verifier check rules/` in its order (packs as load_all
    # gives them, lemmas first); wherever a row or a pack is left out, a "..." line says so
    text = (ROOT / "README.md").read_text()
    intro, rest = text.split("## What a run looks like", 1)[1].split("```\n", 1)
    assert "Abridged" in intro
    sample = rest.split("```", 1)[0].splitlines()
    packs, _ = load_all([ROOT / "rules"])
    order = [p.name for p in packs]
    rows = {p.name: [(f"lemma {r.id}" if r.role == "lemma" else r.id) for r in p.lemmas + p.rules]
            for p in packs}
    seen_packs, pack, expect, skipped = [], None, [], False
    verdicts = ("holds", "violated", "vacuous", "bounded", "unknown", "error")
    for line in sample:
        if line.startswith("pack "):
            name = line.split()[1]
            assert not expect or skipped, f"rows of {pack} left out without '...'"
            nxt = order[len(seen_packs):]
            assert nxt and (nxt[0] == name or skipped), f"pack {name} follows a left-out pack without '...'"
            seen_packs += order[len(seen_packs):order.index(name) + 1]
            pack, expect, skipped = name, list(rows[name]), False
        elif line.strip() == "...":
            skipped = True
        elif line[2:].split(" ", 1)[0] in verdicts and not line.startswith("    "):
            body = line[12:]
            rid = "lemma " + body.split()[1] if body.startswith("lemma ") else body.split()[0]
            assert rid in expect, f"{rid} is not the next row of {pack}"
            assert expect.index(rid) == 0 or skipped, f"rows before {rid} left out without '...'"
            expect, skipped = expect[expect.index(rid) + 1:], False
    assert not expect or skipped
    assert seen_packs == order or skipped, "packs after the last one shown left out without '...'"
