"""Generate docs/cli.md from the argument parser, so the CLI reference cannot drift."""

from __future__ import annotations

import argparse

__all__ = ["cli_markdown"]


def cli_markdown() -> str:
    """Markdown text of ``resonance --help`` and every subcommand's help."""
    from resonance.cli import build_parser  # noqa: PLC0415

    p = build_parser()
    parts = ["# Command-line reference", "", "Generated from the argument parser "
             "(`python -m resonance.docgen > docs/cli.md`); a test checks it is current.", "",
             "```", p.format_help().rstrip(), "```", ""]
    for action in p._actions:  # argparse keeps subparsers here
        if isinstance(action, argparse._SubParsersAction):
            for name, sub in action.choices.items():
                parts += [f"## resonance {name}", "", "```", sub.format_help().rstrip(), "```", ""]
    return "\n".join(parts)


if __name__ == "__main__":  # pragma: no cover
    print(cli_markdown(), end="")
