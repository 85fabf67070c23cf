"""The subject report: one self-contained HTML page built from report sections.

The core writes the page frame and the verdict (always first); everything
below it comes from ``ReportSection`` descriptors (``headprep_register_report_sections``),
sorted by ``order`` then name. A section's ``render(bundle, assets) -> str``
returns an HTML fragment; ``assets`` (:class:`Assets`) turns pictures into
inline ``data:`` URIs with alt text, so the page needs no other file and no
network. When a section's data are absent from the bundle it says so in one
plain sentence (:func:`absent`) instead of failing.

The verdict is ``fail`` if any finding is a ``fail``, ``review`` if any is a
``warn``, else ``pass``; it is shown by word and by shape, never by colour alone.
"""
from __future__ import annotations

import base64
import html
import io
import os
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from .atomic import write_text_atomic
from .bundle import Bundle, load_bundle
from .errors import UsageError
from .findings import verdict
from .model import Finding

__all__ = ["VERDICTS", "Assets", "Markup", "verdict_of", "deciding_findings", "build_report", "write_report",
           "esc", "absent", "table", "severity_badge", "flatten", "fmt"]

VERDICTS = ("pass", "review", "fail")
#: how many deciding findings the verdict lists before "and N more"
MAX_DECIDING = 8
_SEVERITY_ORDER = {"fail": 0, "warn": 1, "info": 2}
#: verdict -> the sentence under the verdict word
_VERDICT_TEXT = {
    "pass": "No check failed or asked for a closer look.",
    "review": "Nothing failed, but some checks ask for a closer look before this model is used.",
    "fail": "At least one check failed: do not use this forward model until it is fixed.",
}


# ------------------------------------------------------------------ verdict
verdict_of = verdict  # the one rule, kept in prep.findings


def deciding_findings(findings: Iterable[Finding]) -> list[Finding]:
    """The findings that decide the verdict: the fails, or else the warnings."""
    items = list(findings)
    worst = verdict_of(items)
    want = {"fail": "fail", "review": "warn"}.get(worst)
    return [f for f in items if f.severity == want]


# ------------------------------------------------------------------ html helpers
def esc(value: Any) -> str:
    """HTML-escape ``str(value)``."""
    return html.escape(str(value), quote=True)


def fmt(value: Any, digits: int = 3) -> str:
    """A number for people: ``digits`` significant figures, ints as they are."""
    if isinstance(value, (bool, np.bool_)):
        return "yes" if value else "no"
    if isinstance(value, (int, np.integer)):
        return str(int(value))
    if isinstance(value, (float, np.floating)):
        v = float(value)
        if not np.isfinite(v):
            return str(v)
        if v != 0 and (abs(v) >= 1e5 or abs(v) < 1e-3):
            return f"{v:.{digits - 1}e}"
        return f"{v:.{digits}g}"
    return str(value)


def absent(sentence: str) -> str:
    """A plain paragraph saying what the bundle lacks (graceful degradation)."""
    return f'<p class="absent">{esc(sentence)}</p>'


class Markup(str):
    """A string that is already HTML (not escaped again by :func:`table`)."""


def table(headers: Sequence[str], rows: Iterable[Sequence[Any]], *, numeric: Sequence[int] = (),
          caption: str = "", cls: str = "", row_attrs: Sequence[str] | None = None) -> str:
    """An HTML table; cells are escaped unless they are ``Markup``; ``numeric`` columns align right."""
    num = set(numeric)
    head = "".join(f'<th scope="col"{" class=num" if i in num else ""}>{esc(h)}</th>'
                   for i, h in enumerate(headers))
    body = []
    for r, row in enumerate(rows):
        attrs = f" {row_attrs[r]}" if row_attrs is not None else ""
        cells = "".join(f'<td{" class=num" if i in num else ""}>{c if isinstance(c, Markup) else esc(c)}</td>'
                        for i, c in enumerate(row))
        body.append(f"<tr{attrs}>{cells}</tr>")
    cap = f"<caption>{esc(caption)}</caption>" if caption else ""
    klass = f' class="{esc(cls)}"' if cls else ""
    return (f'<div class="scroll"><table{klass}>{cap}<thead><tr>{head}</tr></thead>'
            f'<tbody>{"".join(body)}</tbody></table></div>')


def flatten(d: Mapping[str, Any], prefix: str = "") -> list[tuple[str, Any]]:
    """Nested mapping -> sorted ``[(dotted.key, value)]``; lists of scalars stay lists."""
    out: list[tuple[str, Any]] = []
    for k, v in d.items():
        key = f"{prefix}{k}"
        if isinstance(v, Mapping):
            out.extend(flatten(v, key + "."))
        else:
            out.append((key, v))
    return sorted(out, key=lambda kv: kv[0])


# shapes: pass a circle with a tick, review a triangle with a bar, fail a diamond with a cross,
# a note (info finding) a rounded square with an "i"
_SHAPES = {
    "pass": '<circle cx="12" cy="12" r="10"/><path d="M7 12.5l3.2 3.2L17 8.8" class="mark"/>',
    "review": '<path d="M12 2.5L22.5 21H1.5z"/><path d="M12 9v6M12 17.6v.4" class="mark"/>',
    "fail": '<path d="M12 1.5L22.5 12 12 22.5 1.5 12z"/><path d="M8.5 8.5l7 7M15.5 8.5l-7 7" class="mark"/>',
    "note": '<rect x="3" y="3" width="18" height="18" rx="3"/><path d="M12 11v6M12 7.4v.4" class="mark"/>',
}
_SEV_TO_SHAPE = {"fail": "fail", "warn": "review", "info": "note"}
_SEV_WORD = {"fail": "FAIL", "warn": "WARN", "info": "NOTE"}


def _shape(kind: str, size: int) -> str:
    return (f'<svg class="shape {kind}" width="{size}" height="{size}" viewBox="0 0 24 24" '
            f'aria-hidden="true" focusable="false">{_SHAPES[kind]}</svg>')


def severity_badge(severity: str) -> Markup:
    """A finding's severity as shape plus word (never colour alone)."""
    kind = _SEV_TO_SHAPE[severity]
    return Markup(f'<span class="badge {kind}">{_shape(kind, 14)}<b>{_SEV_WORD[severity]}</b></span>')


# ------------------------------------------------------------------ assets
@dataclass
class _Stats:
    images: int = 0
    bytes: int = 0


class Assets:
    """Inlines pictures into the page as base64 ``data:`` URIs, each with alt text.

    Sections call :meth:`png`, :meth:`figure` (matplotlib) or :meth:`scene`
    (pyvista); each returns a ``<figure>`` fragment. Create figures and
    plotters with :func:`prep.render.figure` / :func:`prep.render.plotter`.
    """

    def __init__(self) -> None:
        self.stats = _Stats()

    def png(self, data: bytes, alt: str, caption: str = "", *, width: int | None = None) -> str:
        """``<figure><img src="data:image/png;base64,..." alt=...></figure>``; ``alt`` must say what it shows."""
        if not alt.strip():
            raise ValueError("every picture needs alt text")
        if not data.startswith(b"\x89PNG\r\n\x1a\n"):
            raise ValueError("Assets.png expects PNG bytes")
        self.stats.images += 1
        self.stats.bytes += len(data)
        uri = "data:image/png;base64," + base64.b64encode(data).decode("ascii")
        w = f' style="max-width:{int(width)}px"' if width else ""
        cap = f"<figcaption>{esc(caption)}</figcaption>" if caption else ""
        return f'<figure><img src="{uri}" alt="{esc(alt)}"{w}>{cap}</figure>'

    def figure(self, fig: Any, alt: str, caption: str = "", *, dpi: int = 100, tight: bool = False) -> str:
        """Inline a matplotlib ``Figure`` (from :func:`prep.render.figure`).

        ``tight`` crops to the drawn extent, at the price of drawing twice
        (about 0.3 s a figure on the project's machine): lay figures out with
        ``subplots_adjust`` instead where speed matters.
        """
        buf = io.BytesIO()
        fig.savefig(buf, format="png", dpi=dpi, bbox_inches="tight" if tight else None, facecolor="white")
        return self.png(buf.getvalue(), alt, caption)

    @staticmethod
    def scene_png(plotter: Any) -> bytes:
        """Render a pyvista plotter's current view to PNG bytes (the plotter stays open)."""
        from matplotlib import image as mpimg

        img = np.asarray(plotter.screenshot(return_img=True))
        buf = io.BytesIO()
        mpimg.imsave(buf, img, format="png")
        return buf.getvalue()

    def scene(self, plotter: Any, alt: str, caption: str = "") -> str:
        """Inline the current view of an off-screen pyvista plotter (from :func:`prep.render.plotter`)."""
        return self.png(self.scene_png(plotter), alt, caption)


# ------------------------------------------------------------------ page
def _verdict_block(findings: Sequence[Finding], stored: Any = None) -> str:
    verdict = verdict_of(findings)
    counts = {s: sum(f.severity == s for f in findings) for s in ("fail", "warn", "info")}
    deciding = deciding_findings(findings)
    items = "".join(
        f'<li>{severity_badge(f.severity)} <span class="msg">{esc(f.message)}</span> '
        f'<code>{esc(f.code)}</code></li>' for f in deciding[:MAX_DECIDING])
    if len(deciding) > MAX_DECIDING:
        items += f"<li>and {len(deciding) - MAX_DECIDING} more of the same severity (see All findings).</li>"
    decide = (f'<p class="lead">What decides it:</p><ul class="deciding">{items}</ul>' if deciding
              else "")
    count_text = (f'<p class="counts"><span id="count-fail">{counts["fail"]}</span> failed, '
                  f'<span id="count-warn">{counts["warn"]}</span> to review, '
                  f'<span id="count-info">{counts["info"]}</span> notes.</p>')
    if stored is not None and stored != verdict:
        count_text += (f'<p class="absent">The bundle itself records the verdict "{esc(stored)}"; this page '
                       f'recomputes it from the findings (fail beats review beats pass).</p>')
    return (f'<section class="verdict {verdict}" id="verdict" data-verdict="{verdict}" aria-labelledby="verdict-word">'
            f'<div class="verdict-head">{_shape(verdict, 56)}'
            f'<div><p class="kicker">Verdict</p><h2 id="verdict-word">{verdict.upper()}</h2>'
            f'<p>{esc(_VERDICT_TEXT[verdict])}</p></div></div>{count_text}{decide}</section>')


def _sections(registry: Any) -> list[Any]:
    return sorted(registry.descriptors("report_section"), key=lambda d: (d.order, d.name))


def build_report(bundle: Bundle, registry: Any) -> str:
    """The whole page as one HTML string.

    Parameters
    ----------
    bundle : Bundle
        A loaded (verified) bundle.
    registry : Registry
        Supplies the ``report_section`` descriptors.
    """
    from . import __version__

    man = bundle.manifest
    findings = bundle.findings
    assets = Assets()
    subject = man.get("subject", {}).get("id", "unnamed subject")
    toc, parts = [], []
    for desc in _sections(registry):
        body = registry.call(desc, "render", bundle, assets,
                             step=f"report section '{desc.name}' rendering")
        if not body:
            continue
        title = desc.title or desc.name.replace("_", " ").capitalize()
        sid = f"s-{desc.name}"
        toc.append(f'<li><a href="#{esc(sid)}">{esc(title)}</a></li>')
        parts.append(f'<section class="part" id="{esc(sid)}" aria-labelledby="{esc(sid)}-h">'
                     f'<h2 id="{esc(sid)}-h">{esc(title)}</h2>{body}</section>')
    kit = man.get("kit", {})
    made = f'{kit.get("name", "headprep")} {kit.get("version", "?")}'
    head = (f'<header class="top"><p class="kicker">Subject quality report</p>'
            f'<h1>{esc(subject)}</h1><p class="meta">bundle made by {esc(made)} on '
            f'{esc(man.get("created_utc", "an unknown date"))}; page written by headprep {esc(__version__)}</p></header>')
    nav = f'<nav aria-label="Sections"><ol>{"".join(toc)}</ol></nav>' if toc else ""
    return (f'<!DOCTYPE html>\n<html lang="en"><head><meta charset="utf-8">'
            f'<meta name="viewport" content="width=device-width, initial-scale=1">'
            f'<link rel="icon" href="data:,">'
            f'<title>{esc(subject)}: {verdict_of(findings)} (headprep report)</title>'
            f'<style>{_CSS}</style></head><body><main>{head}{_verdict_block(findings, man.get("verdict"))}{nav}'
            f'{"".join(parts)}<footer>One self-contained page: every picture is inline and nothing '
            f'is fetched from a network.</footer></main></body></html>\n')


def write_report(bundle: Bundle | str | os.PathLike[str], registry: Any, out: str | os.PathLike[str], *,
                 force: bool = False) -> Path:
    """Build the page and write it atomically to ``out`` (refused if it exists, unless ``force``).

    Parameters
    ----------
    bundle : Bundle or path
        A loaded bundle, or a bundle's path (loaded and verified here:
        :class:`~prep.errors.BundleError` if damaged, and nothing is written).
    registry : Registry
    out : path
        The HTML file.
    force : bool
        Replace ``out`` if it exists.
    """
    path = Path(out)
    if not isinstance(bundle, Bundle):
        bundle = load_bundle(bundle)
    if path.is_dir():
        raise UsageError(f"{path}: is a directory; give a file name such as report.html")
    if path.exists() and not force:
        raise UsageError(f"{path}: already exists; use --force to replace it")
    text = build_report(bundle, registry)
    write_text_atomic(path, text)
    umask = os.umask(0o022)  # read back the process umask (there is no getter) and restore it
    os.umask(umask)
    os.chmod(path, 0o666 & ~umask)  # a page to share: the atomic temp file was created private (0600)
    return path


_CSS = """
:root{--ink:#22303a;--soft:#5d6b75;--paper:#fbfaf7;--card:#ffffff;--rule:#d9d4ca;--accent:#3c5a73;
--pass:#2e6f62;--review:#8a5a00;--fail:#9b2f25}
*{box-sizing:border-box}
body{margin:0;background:var(--paper);color:var(--ink);font:15px/1.5 system-ui,-apple-system,"Segoe UI",
Roboto,"Noto Sans",sans-serif}
main{max-width:1080px;margin:0 auto;padding:24px 20px 48px}
h1{font-size:28px;margin:2px 0 4px;font-weight:650}h2{font-size:20px;margin:0 0 12px;font-weight:650}
h3{font-size:16px;margin:18px 0 8px}
.kicker{text-transform:uppercase;letter-spacing:.09em;font-size:12px;color:var(--soft);margin:0}
.meta{color:var(--soft);margin:0 0 18px}
.verdict{background:var(--card);border:1px solid var(--rule);border-top:6px solid currentColor;
border-radius:6px;padding:18px 22px;margin-bottom:18px}
.verdict h2{font-size:34px;letter-spacing:.04em;margin:0}
.verdict-head{display:flex;gap:18px;align-items:center}.verdict-head p{margin:0;color:var(--ink)}
.verdict.pass{color:var(--pass)}.verdict.review{color:var(--review)}.verdict.fail{color:var(--fail)}
.verdict .counts,.verdict .lead,.verdict ul{color:var(--ink)}
.shape{flex:none}.shape path.mark{fill:none;stroke:#fff;stroke-width:2.4;stroke-linecap:round}
.shape.pass{fill:var(--pass)}.shape.review{fill:var(--review)}.shape.fail{fill:var(--fail)}
.shape.note{fill:var(--accent)}.badge.note{color:var(--accent)}
.badge{display:inline-flex;align-items:center;gap:4px;font-size:12px;letter-spacing:.05em;white-space:nowrap}
.badge.pass{color:var(--pass)}.badge.review{color:var(--review)}.badge.fail{color:var(--fail)}
ul.deciding{padding-left:0;list-style:none}ul.deciding li{margin:6px 0}
code{font:12.5px ui-monospace,"DejaVu Sans Mono",monospace;color:var(--soft)}
nav ol{display:flex;flex-wrap:wrap;gap:6px 18px;list-style:none;padding:0;margin:0 0 18px}
nav a{color:var(--accent)}
.part{background:var(--card);border:1px solid var(--rule);border-radius:6px;padding:18px 22px;margin-bottom:18px}
.part>h2{border-bottom:1px solid var(--rule);padding-bottom:6px}
.absent{color:var(--soft);font-style:italic}
figure{margin:8px 0;display:inline-block;vertical-align:top}
figure img{max-width:100%;height:auto;border:1px solid var(--rule);border-radius:4px;background:#fff}
figcaption{font-size:13px;color:var(--soft);max-width:520px}
.gallery{display:grid;grid-template-columns:repeat(auto-fit,minmax(240px,1fr));gap:10px}
.gallery figure{margin:0}
.scroll{overflow-x:auto;max-height:520px;overflow-y:auto}
table{border-collapse:collapse;font-size:13.5px;margin:6px 0;min-width:50%}
th,td{padding:4px 10px;border-bottom:1px solid #ebe7df;text-align:left;vertical-align:top}
th{position:sticky;top:0;background:#f1eee7;font-weight:600}
td.num,th.num{text-align:right;font-variant-numeric:tabular-nums}
tr.flagged td{background:#fbf3e4}
caption{text-align:left;color:var(--soft);padding:4px 0}
dl.facts{display:grid;grid-template-columns:max-content 1fr;gap:2px 16px;margin:6px 0}
dl.facts dt{color:var(--soft)}dl.facts dd{margin:0}
.hash-text{font:12px ui-monospace,"DejaVu Sans Mono",monospace;word-break:break-all}
footer{color:var(--soft);font-size:13px;margin-top:24px}
@media print{body{background:#fff}nav{display:none}.scroll{max-height:none;overflow:visible}
.part,.verdict{break-inside:avoid-page;border-color:#999}}
"""
