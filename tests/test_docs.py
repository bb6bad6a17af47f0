from pathlib import Path

from verifier.lang import vocab

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
