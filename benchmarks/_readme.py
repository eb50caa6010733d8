"""The one writer of benchmarks/README.md: each benchmark replaces its own section."""

from __future__ import annotations

from pathlib import Path


def write_section(text, heading, drop=()):
    """Replace the section of README.md headed ``heading`` with ``text`` where it stands
    (append it if new); sections whose heading starts with one of ``drop`` go."""
    path = Path(__file__).with_name("README.md")
    old = path.read_text() if path.exists() else "# Benchmarks\n"
    parts = old.split("\n## ")
    head, sections = parts[0], ["## " + p for p in parts[1:]]
    # the section replaced where it stands (appended if new), so that other sections and
    # their order stay as they are
    kept, placed = [], False
    for s in sections:
        if s.startswith(heading + "\n") or s.rstrip() == heading:
            if not placed:
                kept.append(text)
                placed = True
        elif not any(s.startswith(g) for g in drop):
            kept.append(s)
    if not placed:
        kept.append(text)
    path.write_text(head.rstrip() + "\n\n" + "\n\n".join(s.rstrip() for s in kept) + "\n")
