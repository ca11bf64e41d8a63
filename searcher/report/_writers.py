"""Dossier writers: one self-contained HTML page, Markdown and JSON.

The HTML embeds its figures as base64 PNG data URIs and its style inline; it loads no script,
font or stylesheet.  Every string is escaped by jinja2's autoescape, so user text (a study
summary, a team name) is shown as text, never run as markup.
"""
from __future__ import annotations

import base64
import json
import math
from pathlib import Path

import jinja2

from searcher.errors import ensure_folder
from searcher.report._plots import PLOTS, render_plots
from searcher.report._sections import sections

__all__ = ["FILES", "html_page", "json_text", "markdown_text", "plot_files",
           "write_dossier"]

# What a dossier folder holds (names relative to it); plots go under plots/<name>.png.
FILES = {"html": "dossier.html", "markdown": "dossier.md", "json": "dossier.json",
         "config": "choice.yaml", "weights": "choice.pt", "normaliser": "choice-normaliser.json"}

PAGE = """<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>Dossier: {{ study.name }}</title>
<style>
body { font-family: sans-serif; max-width: 1100px; margin: 1.5em auto; padding: 0 1em;
       color: #1d2430; line-height: 1.45; }
header { border-bottom: 3px solid #2b5c8a; margin-bottom: 1em; }
h1 { font-size: 1.6em; margin-bottom: .2em; } h2 { font-size: 1.25em; margin-top: 1.6em;
     border-left: 6px solid #2a9d8f; padding-left: .4em; }
.meta { color: #55606e; margin: .2em 0 .8em; }
nav ol { columns: 2; font-size: .92em; }
table { border-collapse: collapse; margin: .6em 0; font-size: .9em; }
th, td { border: 1px solid #c8ced6; padding: .25em .55em; text-align: left; vertical-align: top; }
th { background: #eef2f6; }
pre { background: #f5f6f8; padding: .6em; overflow-x: auto; font-size: .85em; }
figure { margin: .8em 0; } figcaption { color: #55606e; font-size: .9em; }
img { max-width: 100%; }
#before-use { background: #fdf6e3; padding: .2em .9em .6em; border: 1px solid #e2c98f; }
</style></head>
<body>
<header>
<h1>Evidence dossier: {{ study.name }}</h1>
<p class="meta">{{ study.summary }}{% if study.team %} · team: {{ study.team }}{% endif %}
 · made {{ made }} · study hash {{ study.hash[:12] }}</p>
</header>
<nav><ol>{% for anchor, title, _ in sections %}<li><a href="#{{ anchor }}">{{ title }}</a></li>{% endfor %}</ol></nav>
{% for anchor, title, blocks in sections %}
<section id="{{ anchor }}"><h2>{{ title }}</h2>
{% for block in blocks %}
{% if block[0] == "text" %}<p>{{ block[1] }}</p>
{% elif block[0] == "list" and block[1] %}<ul>{% for item in block[1] %}<li>{{ item }}</li>{% endfor %}</ul>
{% elif block[0] == "code" %}<pre>{{ block[1] }}</pre>
{% elif block[0] == "table" %}<table><thead><tr>{% for h in block[1] %}<th>{{ h }}</th>{% endfor %}</tr></thead>
<tbody>{% for row in block[2] %}<tr>{% for cell in row %}<td>{{ cell }}</td>{% endfor %}</tr>{% endfor %}</tbody></table>
{% elif block[0] == "plot" and block[1] in plots %}<figure><img alt="{{ plots[block[1]][0] }}"
 src="data:image/png;base64,{{ plots[block[1]][1] }}"><figcaption>{{ plots[block[1]][0] }}</figcaption></figure>
{% endif %}
{% endfor %}
</section>
{% endfor %}
</body></html>
"""

_ENV = jinja2.Environment(autoescape=True, undefined=jinja2.StrictUndefined)


def html_page(content: dict, plots: dict[str, tuple[str, bytes]]) -> str:
    """The dossier as one self-contained HTML page.

    Args:
        content: the dossier content dict.
        plots: name → (caption, PNG bytes), from ``render_plots``.
    """
    encoded = {name: (caption, base64.b64encode(png).decode("ascii"))
               for name, (caption, png) in plots.items()}
    return _ENV.from_string(PAGE).render(
        study=content["study"], made=content["provenance"]["finished"],
        sections=sections(content), plots=encoded)


def _md_cell(value: str) -> str:
    # A pipe or newline would break the table row; keep cells on one line.
    return str(value).replace("|", "\\|").replace("\n", " ")


def markdown_text(content: dict, plot_files: dict[str, tuple[str, str]]) -> str:
    """The same dossier as Markdown; figures are linked as PNG files beside it.

    Args:
        content: the dossier content dict.
        plot_files: name → (caption, relative path of the PNG).
    """
    study = content["study"]
    lines = [f"# Evidence dossier: {study['name']}", "",
             f"{study['summary']}" + (f" · team: {study['team']}" if study["team"] else ""), ""]
    for _, title, blocks in sections(content):
        lines += [f"## {title}", ""]
        for block in blocks:
            kind = block[0]
            if kind == "text":
                lines += [block[1], ""]
            elif kind == "list" and block[1]:
                lines += [f"- {item}" for item in block[1]] + [""]
            elif kind == "code":
                lines += ["```yaml", block[1].rstrip(), "```", ""]
            elif kind == "table":
                lines.append("| " + " | ".join(_md_cell(h) for h in block[1]) + " |")
                lines.append("|" + "---|" * len(block[1]))
                lines += ["| " + " | ".join(_md_cell(c) for c in row) + " |" for row in block[2]]
                lines.append("")
            elif kind == "plot" and block[1] in plot_files:
                caption, rel = plot_files[block[1]]
                lines += [f"![{caption}]({rel})", ""]
    return "\n".join(lines)


def _plain(value):
    """JSON has no NaN/inf: write them as null."""
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    if isinstance(value, Path):
        return str(value)
    return value


def json_text(content: dict) -> str:
    """The dossier content as strict JSON (NaN and inf become null)."""
    return json.dumps(_plain(content), indent=2, allow_nan=False)




def plot_files() -> list[str]:
    """Relative paths of the figures, in dossier order."""
    return [f"plots/{name}.png" for name in PLOTS]


def write_dossier(content: dict, folder: Path) -> None:
    """Draw the figures and write HTML, Markdown, JSON and PNG files into ``folder``.

    ``content["files"]`` must already name them (see :data:`FILES`, :func:`plot_files`).

    Raises:
        UserError: ``folder`` or its ``plots`` folder cannot be made or written.
    """
    folder = Path(folder)
    ensure_folder(folder / "plots", "folder")
    plots = render_plots(content)
    linked = {}
    for name, (caption, png) in plots.items():
        rel = f"plots/{name}.png"
        (folder / rel).write_bytes(png)
        linked[name] = (caption, rel)
    files = content["files"]
    (folder / files["html"]).write_text(html_page(content, plots), encoding="utf-8")
    (folder / files["markdown"]).write_text(markdown_text(content, linked), encoding="utf-8")
    (folder / files["json"]).write_text(json_text(content), encoding="utf-8")
