"""One self-contained HTML page for a built report: inline CSS, figures as base64 PNG ``data:`` URIs.

The page loads nothing from the network and opens from disk. Every number of
the summary table sits in a cell ``<td data-key="FIELD">`` naming the run
report field it shows, so a reader (or a test) can check it against the JSON.
A small inline script records image load failures and script errors into the
element ``#page-errors`` and sets ``data-images-ok`` on ``<body>`` once every
figure has decoded, so a headless browser's DOM dump shows whether the page
drew. Figures are encoded as PNG (RFC 2397 ``data:`` URIs, base64 of RFC 4648).
"""

from __future__ import annotations

import base64
import html
import io
import os

__all__ = ["render_html", "figure_png", "write_report"]

_CSS = """
body{font-family:system-ui,-apple-system,"Segoe UI",sans-serif;margin:2em auto;max-width:60em;color:#1c2833;
padding:0 1em}
h1{font-size:1.5em}h2{font-size:1.15em;margin-top:2em;border-bottom:1px solid #d5d8dc}
table{border-collapse:collapse;margin:.5em 0}td,th{border:1px solid #d5d8dc;padding:.25em .6em;text-align:left}
td.num{text-align:right;font-variant-numeric:tabular-nums}figure{margin:1em 0}img{max-width:100%}
figcaption{font-size:.9em;color:#566573}.note{color:#7b7d7d;font-size:.9em}.memory{color:#b9770e}
"""

_SCRIPT = """
<script>
window.__errors=[];
function __note(msg){window.__errors.push(msg);var e=document.getElementById('page-errors');
 if(e){e.textContent=window.__errors.join('\\n');e.setAttribute('data-count',window.__errors.length);}}
window.onerror=function(m,s,l){__note('script error: '+m+' at line '+l);};
var __ce=console.error;console.error=function(){__note('console error: '+Array.prototype.join.call(arguments,' '));
 return __ce.apply(console,arguments);};
window.addEventListener('error',function(ev){var t=ev.target;if(t&&t.tagName==='IMG'){
 __note('image failed: '+t.getAttribute('data-figure'));}},true);
window.addEventListener('load',function(){var imgs=document.querySelectorAll('img[data-figure]'),ok=0;
 for(var i=0;i<imgs.length;i++){if(imgs[i].complete&&imgs[i].naturalWidth>0){ok++;}
 else{__note('image not drawn: '+imgs[i].getAttribute('data-figure'));}}
 document.body.setAttribute('data-images-ok',ok+'/'+imgs.length);});
</script>
"""


def figure_png(fig, dpi=100):
    """PNG bytes of a matplotlib figure."""
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi)
    return buf.getvalue()


def _e(text):
    return html.escape(str(text), quote=True)


def _references_table(rep):
    if not rep.references:
        if rep.catalog_entry is not None:
            return (f"<p class='note'>{_e(rep.catalog_entry['name'])} is a catalog graph, but the catalog lists no "
                    f"published figure for k = {rep.run['k']}.</p>")
        return ""
    head = ("<table id='references'><tr><th>ε</th><th>figure</th><th>this run</th><th>best published</th>"
            "<th>this run / published</th><th>source</th></tr>")
    body, sources = [], []
    for r in rep.references:
        fmt = (lambda v: f"{v:,.0f}") if r["metric"] == "cut_edges" else (lambda v: f"{v:.4f}")
        for text in (r["citation"], r.get("note")):
            if text and text not in sources:
                sources.append(text)
        marks = "".join(f"[{sources.index(t) + 1}]" for t in (r["citation"], r.get("note")) if t)
        memo = " <span class='memory'>from memory</span>" if r["from_memory"] else ""
        mark = " ← this run's ε" if r["same_eps"] else ""
        ratio = f"{r['ratio']:.3f}" if r["ratio"] is not None else "—"
        body.append(f"<tr><td>{r['imbalance']:g}{mark}</td><td>{_e(r['metric'].replace('_', ' '))}</td>"
                    f"<td class='num'>{fmt(r['ours'])}</td><td class='num' data-ref='{r['imbalance']:g}'>"
                    f"{fmt(r['published'])}</td><td class='num'>{ratio}</td><td>{marks}{memo}</td></tr>")
    foot = "".join(f"<li class='note'>{_e(t)}</li>" for t in sources)
    if any(r["from_memory"] for r in rep.references):
        foot += ("<li class='note memory'>from memory: the value was recalled from memory and not checked "
                 "against the source.</li>")
    entry = rep.catalog_entry
    intro = (f"<p>{_e(entry['name'])} ({_e(entry['collection'])}; matched by {_e(entry['matched_by'])}). "
             "Published best cuts for the same k; they come from other methods and far longer runs. Our run "
             f"allowed ε = {rep.run.get('imbalance_allowed')}: compare it with rows of the same or a smaller ε.</p>")
    return intro + head + "".join(body) + "</table><ol>" + foot + "</ol>"


def _baselines_table(rep):
    if len(rep.baselines) <= 1:
        return ""
    rows = "".join(
        f"<tr><td>{_e(b['name'])}</td><td class='num' data-baseline='{_e(b['name'])}'>{b['cut_fraction']:.6f}</td>"
        f"<td class='num'>{b['cut_edges']:,}</td><td class='num'>{b['imbalance']:.6f}</td></tr>"
        for b in rep.baselines)
    return ("<table id='baselines'><tr><th>method</th><th>cut fraction</th><th>cut edges</th><th>imbalance</th></tr>"
            + rows + "</table>")


def render_html(rep, title=None, dpi=100):
    """The whole page as a string (see the module docstring)."""
    run = rep.run
    title = title or f"Shardline report: {run.get('input', {}).get('graph', '?')} → {run['k']} shards"
    parts = ["<!DOCTYPE html><html lang='en'><head><meta charset='utf-8'>",
             f"<title>{_e(title)}</title><style>{_CSS}</style>{_SCRIPT}</head><body>",
             f"<h1>{_e(title)}</h1>", f"<p class='note'>{_e(run.get('tool', 'shardline'))}</p>",
             "<h2>Summary</h2><table id='summary'>"]
    for key, label, value in rep.summary:
        parts.append(f"<tr><th>{_e(label)}</th><td class='num' data-key='{_e(key)}'>{_e(value)}</td></tr>")
    parts.append("</table>")
    refs = _references_table(rep)
    if refs:
        parts.append("<h2>Published figures for this graph</h2>" + refs)
    table = _baselines_table(rep)
    for name, (fig_title, fig, caption) in rep.figures.items():
        data = base64.b64encode(figure_png(fig, dpi)).decode("ascii")
        parts.append(f"<h2>{_e(fig_title)}</h2><figure><img data-figure='{_e(name)}' alt='{_e(fig_title)}' "
                     f"src='data:image/png;base64,{data}'><figcaption>{_e(caption)}</figcaption></figure>")
        if name == "baselines" and table:
            parts.append(table)
    if rep.notes:
        parts.append("<h2>Left out</h2><ul>" + "".join(f"<li class='note'>{_e(n)}</li>" for n in rep.notes)
                     + "</ul>")
    parts.append("<pre id='page-errors' data-count='0'></pre></body></html>\n")
    return "".join(parts)


def write_report(rep, path, png_dir=None, dpi=100):
    """Write the page to ``path`` (and every figure as ``png_dir/<name>.png``); returns the page's size in bytes.

    Everything is rendered first, then all files are written to temporary
    names and renamed into place together (:func:`partition.atomic.atomic_paths`),
    so an error leaves no partial output.
    """
    from partition.atomic import atomic_paths

    data = [render_html(rep, dpi=dpi).encode("utf-8")]
    paths = [os.fspath(path)]
    if png_dir is not None:
        for name, (_, fig, _) in rep.figures.items():
            paths.append(os.path.join(os.fspath(png_dir), f"{name}.png"))
            data.append(figure_png(fig, dpi))
    with atomic_paths(paths) as tmps:
        for tmp, blob in zip(tmps, data):
            with open(tmp, "wb") as fh:
                fh.write(blob)
    return len(data[0])
