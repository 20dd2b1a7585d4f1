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
                    line.startswith((" ", "\t")) for line in lines):
                out.append("\n".join(indent + line for line in lines))
            else:
                out.append(textwrap.fill(" ".join(lines), width, initial_indent=indent, subsequent_indent=indent))
        return "\n\n".join(out)
