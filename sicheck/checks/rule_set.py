"""Notes about the rule set itself (old names still accepted)."""

from __future__ import annotations

from sicheck.checks.engine import check, make_key


@check("rules-note", "info")
def rules_note(ctx, chk):
    """A rule file uses an old name that is still accepted, with the name to use.

    What it checks: notes the rule loader made while reading the rule files (for example a net class
    named `default`, now called `unclassified`).
    Why it matters: old names may stop being accepted; the review must be reproducible from its files.
    How to fix: rename as the note says.
    """
    for i, (where, note) in enumerate(getattr(ctx.rules, "notes", ())):
        yield chk.finding("", "", f"{where}: {note}", key=make_key(chk.id, where))
