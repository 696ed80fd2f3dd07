"""rules-note: notes the rule loader made reach the review as info findings."""

from __future__ import annotations

from dataclasses import replace

from check_tables import findings, rules, segments

SEG = segments({"net": "A"})


def test_rules_note_passes_without_notes():
    assert findings(SEG, rules(), "rules-note") == []


def test_rules_note_fails_with_a_note():
    rs = replace(rules(), notes=(("r.toml, line 3", "net class 'default' is now called 'unclassified'"),))
    (f,) = findings(SEG, rs, "rules-note")
    assert f.severity == "info" and f.message.startswith("r.toml, line 3: net class 'default'")
    assert f.key == "rules-note|r.toml, line 3"


def test_rules_note_off():
    rs = replace(rules(severity={"rules-note": "off"}), notes=(("r.toml, line 3", "x"),))
    assert findings(SEG, rs, "rules-note") == []
