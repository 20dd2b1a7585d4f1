"""Help text layout: prose paragraphs wrap to the terminal; indented blocks (tables) stay as written."""

from __future__ import annotations

import argparse
import textwrap


class HelpFormatter(argparse.RawDescriptionHelpFormatter):
    """Wrap description/epilog paragraphs; keep paragraphs with indented lines verbatim."""

    def _fill_text(self, text: str, width: int, indent: str) -> str:
        paragraphs = text.split("\n\n")
        out = []
        for para in paragraphs:
            lines = para.splitlines()
            if any(line.startswith((" ", "\t")) for line in lines[1:]) or any(
                line.startswith((" ", "\t")) for line in lines
            ):
                out.append("\n".join(indent + line for line in lines))
            else:
                out.append(textwrap.fill(" ".join(lines), width, initial_indent=indent, subsequent_indent=indent))
        return "\n\n".join(out)


def _verdict_lines() -> str:
    from advisor.vocabulary import VERDICT

    return "\n".join(f"  {v.exit_status:<4}{v.name:<16}{v.meaning}" for v in VERDICT.values())


#: The epilog of ``advisor --help`` and ``advisor check --help``: what each exit status means.
EXIT_HELP = f"""exit status:
{_verdict_lines()}
  2   bad input or usage
  1   internal error

Advisory only - not a safety system. Stow at the site's wind limits regardless; follow the
site's laser-safety procedure; defer to the site's responsible staff."""
