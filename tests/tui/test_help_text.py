"""The help content: complete, consistent with the widgets, plain text.

Checks are consistency checks against our own widgets [D] and the cautions
that DESIGN.md asks the help to state [C].
"""

from __future__ import annotations

from chaintriage.tui import help_text as ht
from chaintriage.tui.widgets.strike_grid import COLUMNS, StrikeGrid


def test_every_grid_column_is_explained_with_its_heading():
    helped = {c.key: c for c in ht.COLUMNS}
    assert set(helped) == set(COLUMNS)
    for key, spec in COLUMNS.items():
        assert helped[key].heading == spec.heading
        assert len(helped[key].meaning) > 15


def test_no_key_does_two_things_where_both_are_active():
    active_together = ("ladder", "screen")
    seen: dict[str, str] = {}
    for k in ht.KEYS:
        if k.context not in active_together:
            continue
        for key in k.keys:
            assert key not in seen, f"{key!r} is bound to {seen[key]!r} and {k.action!r}"
            seen[key] = k.action


def test_ladder_keys_match_the_grid_bindings():
    bound = set()
    for b in StrikeGrid.BINDINGS:
        bound.update(b.key.split(","))
    documented = {key for k in ht.KEYS if k.context == "ladder" for key in k.keys}
    assert bound <= documented
    for key in ("up", "down", "k", "j", "pageup", "pagedown", "home", "end", "left", "right"):
        assert key in bound


def test_cautions_say_what_the_figures_are_and_are_not():
    text = " ".join(ht.CAUTIONS).lower()
    for phrase in ("risk-neutral", "european", "jumps", "as quoted now", "not advice"):
        assert phrase in text


def test_help_text_in_both_modes():
    full = ht.help_text()
    assert "CAUTIONS" in full and "P(beyond)" in full and "σ dist" in full
    for k in ht.KEYS:
        assert k.description in full
    plain = ht.help_text(ascii_only=True)
    assert plain.isascii()
    assert "s dist" in plain and "Up / k" in plain


def test_wrapped_help_keeps_every_word_and_fits_the_width():
    text = ht.help_text()
    for width in (40, 78, 120):
        wrapped = ht.wrap_help(text, width)
        assert max(len(line) for line in wrapped.splitlines()) <= width
        assert wrapped.split() == text.split()
    # a long description continues under itself, not under its key
    lines = ht.wrap_help(text, 60).splitlines()
    i = next(n for n, line in enumerate(lines) if line.strip().startswith("f ") and "show only" in line)
    start = lines[i].index("show only")
    assert lines[i + 1][:start].strip() == "" and lines[i + 1][start] != " "


def test_help_shows_the_trade_formulas_and_their_cautions():
    """[D] the return formulas and day counts are spelled out, with the P(profit) and returns caution."""
    text = ht.help_text()
    assert "bid / (strike - bid)" in text and "bid / spot" in text
    assert "365 / calendar days" in text and "not compounded" in text
    cautions = " ".join(ht.CAUTIONS).lower()
    assert "risk-neutral" in cautions and "at expiry" in cautions and "margin" in cautions


def test_new_keys_are_documented_where_they_work():
    """[D] r and z on the triage screen, and every key the target view binds, are in the help."""
    from chaintriage.tui.screens.target_view import TargetViewScreen
    from chaintriage.tui.screens.triage import TriageScreen

    screen_keys = {key for k in ht.KEYS if k.context == "screen" for key in k.keys}
    triage_bound = {key for b in TriageScreen.BINDINGS for key in b.key.split(",")}
    assert {"r", "z"} <= screen_keys and {"r", "z"} <= triage_bound
    documented = {key for k in ht.KEYS if k.context == "targets" for key in k.keys}
    for b in TargetViewScreen.BINDINGS:
        for key in b.key.split(","):
            if key not in ("q", "question_mark", "equals_sign"):  # q and ? close / help everywhere; = works as +
                assert key in documented, key
    text = ht.help_text()
    assert "In the target view" in text and "TARGET VIEW" in text
    assert "|delta| range" in text and "P(beyond) range" in text
