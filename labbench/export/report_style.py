"""The report's look: the window's palette, the page's CSS, and matplotlib figures turned into
inline SVG.

Pictures are drawn with matplotlib's object API (``matplotlib.figure.Figure`` saved as SVG, the
pyplot state machine and any display are never touched) and inlined in the HTML page. Text stays
text (``svg.fonttype = "none"``): the labels are ``<text>`` elements the browser sets in the
page's own sans-serif font, so they are sharp at every zoom, can be searched and copied, and a
figure weighs a few kilobytes instead of carrying every glyph as a path. The price is that the
letters are the reader's font, not matplotlib's; the layout leaves room for a slightly wider one.

matplotlib is imported only inside :func:`new_figure` / :func:`svg_text`, so ``import labbench``
stays light.
"""

from __future__ import annotations

import io
import re

try:  # the window's own colours (Qt-free), shared by the window and the report
    from labbench.palette import LIGHT as _SHARED
except ImportError:  # pragma: no cover - before labbench/palette.py lands
    _SHARED = None

# mirror of labbench/palette.py (LIGHT): used only when that module is not there
_MIRROR = {
    "paper": "#fbfaf6", "panel": "#f3f1ea", "ink": "#22262b", "muted": "#6b7079",
    "rule": "#d9d6cc", "best": "#1f8a5b", "running": "#d9822b", "selected": "#7a3fb0",
    "complete": "#5b6472", "pruned": "#6f7fb8", "failed": "#b8433a", "cancelled": "#8e8e8e",
    "waiting": "#8e8e8e", "band": "#9aa3ae", "band_mid": "#6b7582", "good_span": "#1f8a5b",
    "range": "#d4d8dd", "climb": "#1f8a5b", "milestone": "#145c3c",
}
PALETTE: dict[str, str] = {**_MIRROR, **(_SHARED or {})}

FONT_STACK = "system-ui, -apple-system, 'Segoe UI', 'DejaVu Sans', Arial, sans-serif"
WIDTH_IN = 7.2          # figure width in inches (at 72 pt/in: 518 pt, the page's text width)

CSS = f"""
body{{font-family:{FONT_STACK};max-width:980px;margin:1.5em auto;padding:0 1em;
color:{PALETTE['ink']};background:{PALETTE['paper']};line-height:1.45}}
h1{{font-size:1.45em;margin:.2em 0}}h2{{border-bottom:1px solid {PALETTE['rule']};padding-bottom:.15em;
margin-top:1.8em}}h3{{margin-bottom:.3em}}
table{{border-collapse:collapse;margin:.5em 0}}td,th{{border:1px solid {PALETTE['rule']};
padding:.22em .55em;text-align:left;vertical-align:top}}th{{background:{PALETTE['panel']}}}
td.num{{text-align:right;font-variant-numeric:tabular-nums}}
figure{{margin:1em 0}}figure svg{{max-width:100%;height:auto;display:block}}
figcaption{{color:{PALETTE['muted']};font-size:.9em}}
.sheet{{background:{PALETTE['panel']};border:1px solid {PALETTE['rule']};border-radius:6px;
padding:.6em 1.1em .8em}}
.headline{{display:flex;flex-wrap:wrap;gap:.6em 2.2em;margin:.4em 0 .6em}}
.headline div{{min-width:9em}}.headline b{{display:block;font-size:1.45em;color:{PALETTE['ink']}}}
.headline span{{color:{PALETTE['muted']};font-size:.88em}}
.caution{{border-left:5px solid {PALETTE['running']};background:#fff4e4;padding:.45em .9em;margin:.7em 0}}
.note{{border-left:4px solid {PALETTE['rule']};padding:.3em .8em;margin:.5em 0;color:{PALETTE['muted']}}}
.muted{{color:{PALETTE['muted']}}}code{{background:{PALETTE['panel']};padding:0 .2em}}
"""


def _rc() -> dict:
    return {
        "svg.fonttype": "none",          # real <text>, see the module docstring
        "svg.hashsalt": "labbench",       # stable ids: the same search gives the same file
        "font.family": "sans-serif",
        "font.sans-serif": ["DejaVu Sans", "Arial", "Helvetica"],
        "font.size": 9.5,
        "axes.edgecolor": PALETTE["rule"],
        "axes.labelcolor": PALETTE["ink"],
        "axes.titlesize": 10,
        "axes.spines.top": False,
        "axes.spines.right": False,
        "xtick.color": PALETTE["muted"],
        "ytick.color": PALETTE["muted"],
        "xtick.labelcolor": PALETTE["ink"],
        "ytick.labelcolor": PALETTE["ink"],
        "grid.color": PALETTE["rule"],
        "grid.linewidth": 0.6,
        "legend.frameon": False,
        "legend.fontsize": 8.5,
    }


def drawn_in_style(make):
    """Decorator: ``make`` builds its figure inside the report's matplotlib settings (a local
    ``rc_context``; the global defaults of a program that imports labbench stay untouched)."""
    import functools

    @functools.wraps(make)
    def wrapper(*args, **kwargs):
        import matplotlib

        with matplotlib.rc_context(_rc()):
            return make(*args, **kwargs)

    return wrapper


def new_figure(height_in: float, width_in: float = WIDTH_IN):
    """A matplotlib Figure (no pyplot, no display) in the report's colours; call it inside a
    function decorated with :func:`drawn_in_style`."""
    from matplotlib.figure import Figure

    return Figure(figsize=(width_in, height_in), facecolor=PALETTE["paper"], layout="constrained")


def axes(fig, *args, **kwargs):
    ax = fig.add_subplot(*args, **kwargs)
    ax.set_facecolor(PALETTE["paper"])
    return ax


def legend_below(fig, ax, columns: int = 4) -> None:
    """One legend under the axes, each label once, outside the plot area (never over the data)."""
    seen: dict = {}
    for handle, label in zip(*ax.get_legend_handles_labels()):
        seen.setdefault(label, handle)
    if seen:
        fig.legend(list(seen.values()), list(seen), loc="outside lower center",
                   ncols=min(len(seen), columns))


_HEADER = re.compile(r"^.*?(?=<svg\b)", re.S)
_ID = re.compile(r'\b(id="|url\(#|href="#)([A-Za-z_][\w.-]*)')


def svg_text(fig, name: str, label: str) -> str:
    """The figure as an ``<svg>`` element ready to inline: the XML header and DOCTYPE dropped, its
    ids prefixed with ``name`` (several figures share one page), and an accessible label."""
    import matplotlib

    buffer = io.StringIO()
    with matplotlib.rc_context({**_rc(), "svg.hashsalt": name}):
        fig.savefig(buffer, format="svg", facecolor=fig.get_facecolor(),
                    metadata={"Date": None, "Creator": None, "Format": None, "Type": None})
    text = _HEADER.sub("", buffer.getvalue(), count=1)
    text = _ID.sub(lambda m: f"{m.group(1)}{name}-{m.group(2)}", text)
    text = text.replace("<svg ", f'<svg role="img" aria-label="{_attr(label)}" ', 1)
    return text.strip()


def _attr(text: str) -> str:
    return (text.replace("&", "&amp;").replace('"', "&quot;").replace("<", "&lt;")
            .replace(">", "&gt;"))
