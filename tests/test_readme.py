"""The README's two commands and CI agree (the brief: CI runs exactly the README's test command)."""

from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def _ci_test_command() -> str:
    for line in (ROOT / ".ci" / "run").read_text().splitlines():
        if line.startswith("TEST_COMMAND="):
            return line.split("=", 1)[1].strip().strip('"')
    raise AssertionError(".ci/run defines no TEST_COMMAND")


def test_ci_runs_exactly_the_readme_test_command():
    readme = (ROOT / "README.md").read_text()
    assert _ci_test_command() in readme.splitlines()


def test_readme_opens_with_one_paragraph_then_the_two_commands():
    text = (ROOT / "README.md").read_text()
    blocks = [b for b in text.split("\n\n") if b.strip()]
    assert blocks[0].startswith("# rtanalyzer")
    assert not blocks[1].startswith("#")  # the paragraph stating the job
    first_code = text.index("```")
    assert "rtanalyzer live" in text[first_code : text.index("```", first_code + 3)]
    assert _ci_test_command() in text[first_code : text.index("```", first_code + 3)]
