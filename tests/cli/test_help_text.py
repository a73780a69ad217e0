"""What people read: every --help as printed, README headings named in our text, the safety lines.

Our own contract, no outside source: help text shows a percent sign as "%" (argparse wants
"%%" only in strings it formats), a README heading named anywhere in the package exists,
and the safety advice says that a misheard command can start something.
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from wordspot.cli import _COMMANDS, main

REPO = Path(__file__).resolve().parents[2]
PACKAGE = REPO / "wordspot"


def _help(capsys, argv) -> str:
    with pytest.raises(SystemExit) as exit_info:
        main(argv + ["--help"])
    assert exit_info.value.code == 0
    return capsys.readouterr().out


# every subcommand, the lexicon's two actions and the command itself
HELP_ARGS = [[]] + [[name] for name in _COMMANDS] + [["lexicon", "check"], ["lexicon", "suggest"]]


@pytest.mark.parametrize("argv", HELP_ARGS, ids=lambda a: " ".join(a) or "wordspot")
def test_help_shows_no_doubled_percent(argv, capsys):
    out = _help(capsys, argv)
    assert out.strip() and "%%" not in out


def test_every_subcommand_is_checked():
    assert {a[0] for a in HELP_ARGS if a} == set(_COMMANDS)


def _headings() -> set[str]:
    text = (REPO / "README.md").read_text(encoding="utf-8")
    return {line.lstrip("#").strip().lower() for line in text.splitlines() if re.match(r"#{1,6} ", line)}


def _readme_mentions():
    """(file, text after the word README) for every mention of the top README in the package."""
    for path in sorted(PACKAGE.rglob("*")):
        if path.suffix not in (".py", ".html", ".js", ".css"):
            continue
        text = path.read_text(encoding="utf-8")
        for m in re.finditer(r"(?<![/\w])README\b(?!\.md\b\s*(?:for|in|of)\b)", text):
            yield path.relative_to(REPO), text[m.end():m.end() + 80]


def test_readme_headings_named_in_the_package_exist():
    headings = _headings()
    mentions = list(_readme_mentions())
    assert mentions  # the demo points people to the quick tour
    for where, after in mentions:
        m = re.match(r"""(?:\.md)?(?:'s)?[:,]?\s*(?:section\s*)?["“]([^"”]+)["”]""", after)
        assert m, f"{where}: name the README heading in quotes: README{after[:40]!r}"
        assert m.group(1).strip().lower() in headings, f"{where}: README has no heading {m.group(1)!r}"


def test_demo_points_to_an_existing_heading(capsys):
    out = _help(capsys, ["demo"])
    named = re.findall(r'README: "([^"]+)"', out)
    assert named and all(n.lower() in _headings() for n in named)


def _readme_section(title: str) -> str:
    text = (REPO / "README.md").read_text(encoding="utf-8")
    m = re.search(rf"^## {re.escape(title)}\n(.*?)(?=^## )", text, flags=re.S | re.M)
    assert m, f"README.md has no section {title}"
    return " ".join(m.group(1).split())


def test_readme_safety_covers_stopping_starting_and_recordings_of_people():
    safety = _readme_section("Safety")
    for phrase in ["physical stop", "follow the rules that apply where you work",  # the lines kept
                   "can also *start* something", "on voice alone",
                   "tell people before you record them", "keep the takes folder and the reports private",
                   "--copy-audio", "delete takes", "data-protection law", "workplace's rules"]:
        assert phrase in safety, phrase


def test_demo_and_top_help_say_a_command_can_start_something(capsys):
    from wordspot.cli.demo_cmd import _SAFETY

    assert "physical stop" in _SAFETY and "start something" in _SAFETY and "voice alone" in _SAFETY
    assert "start something" in " ".join(_help(capsys, []).split())
