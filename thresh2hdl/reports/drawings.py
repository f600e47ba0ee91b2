"""The report's pictures, as inline SVG: a unit's datapath tree, the score range, score
histograms and small line charts (training, quantization)."""

from html import escape

__all__ = ["tree_picture", "score_line", "histogram_chart", "unit_histogram_panels",
           "polyline_chart"]


def _capacity(node):
    bits = node.bits
    return (-(1 << (bits - 1)), (1 << (bits - 1)) - 1) if node.signed else (0, (1 << bits) - 1)


def tree_picture(nodes, stages, label):
    """One unit's datapath as a tree, level 0 on the left: each value a box with its name,
    width and exact range, a strip under it placing the range inside what the width holds,
    lines to the operands (a minus where one is subtracted), register stages dashed."""
    box_w, box_h, pitch, gap, top = 150, 40, 48, 44, 34
    by_name = {node.name: node for node in nodes}
    readers = {child for node in nodes for child in node.children}
    rows, y = {}, [0]

    def place(name):                  # leaves in reading order, a value between its operands
        if name in rows:
            return rows[name]
        rows[name] = 0                # read only by a loop of children (an edited report)
        children = [c for c in by_name[name].children if c in by_name]
        rows[name] = (sum(place(c) for c in children) / len(children)) if children else y[0]
        y[0] += 0 if children else 1
        return rows[name]

    for node in nodes:
        if node.name not in readers:
            place(node.name)
    first = min(node.level for node in nodes)
    last = max(node.level for node in nodes)
    col = lambda level: 4 + (level - first) * (box_w + gap)
    row = lambda name: top + rows[name] * pitch
    parts = [f'<text x="{col(level)}" y="12">level {level}</text>'
             for level in range(first, last + 1)]
    for stage in stages:
        after = stage.last
        if first <= after <= last:
            x = col(after) + box_w + gap / 2
            parts.append(f'<line class="stage" x1="{x:.1f}" y1="16" x2="{x:.1f}" '
                         f'y2="{top + y[0] * pitch}" stroke="#b35900" stroke-dasharray="4 3"/>'
                         f'<text x="{x + 3:.1f}" y="26" fill="#b35900">reg {stage.stage}</text>')
    for node in nodes:
        x, top_y = col(node.level), row(node.name)
        minus = {"sub": 1, "rsub": 0}.get(node.kind)
        for k, child in enumerate(node.children):
            if child not in by_name:
                continue
            x0, y0 = col(by_name[child].level) + box_w, row(child) + box_h / 2
            y1 = top_y + box_h / 2
            parts.append(f'<path class="edge" d="M{x0:.1f} {y0:.1f}H{x - gap / 2:.1f}V{y1:.1f}'
                         f'H{x:.1f}" fill="none" stroke="#777"/>')
            if k == minus or (node.kind == "bias" and by_name[child].sign < 0):
                parts.append(f'<text x="{x - 10:.1f}" y="{y1 - 3:.1f}">\u2212</text>')
        lo, hi = node.range
        cap_lo, cap_hi = _capacity(node)
        span = (cap_hi - cap_lo) or 1
        x0 = x + 4 + (lo - cap_lo) / span * (box_w - 8)
        x1 = x + 4 + (hi - cap_lo) / span * (box_w - 8)
        parts.append(f'<g class="node"><title>{escape(node.name)}: {escape(node.kind)}, '
                     f'{node.bits} bits, [{lo}, {hi}] of [{cap_lo}, {cap_hi}]</title>'
                     f'<rect x="{x}" y="{top_y:.1f}" width="{box_w}" height="{box_h}" rx="4" '
                     f'fill="#f7f9fc" stroke="#4a7ebb"/><text x="{x + 5}" y="{top_y + 13:.1f}">'
                     f'<tspan font-weight="bold">{escape(node.name)}</tspan> '
                     f'{node.bits} bits</text><text x="{x + 5}" y="{top_y + 26:.1f}">'
                     f'[{lo}, {hi}]</text><rect x="{x + 4}" y="{top_y + 31:.1f}" '
                     f'width="{box_w - 8}" height="4" fill="#ddd"/><rect x="{x0:.1f}" '
                     f'y="{top_y + 31:.1f}" width="{max(1.0, x1 - x0):.1f}" height="4" '
                     f'fill="#4a7ebb"/></g>')
    width = col(last) + box_w + gap + 40
    height = top + y[0] * pitch
    return (f'<svg xmlns="http://www.w3.org/2000/svg" width="{width}" height="{height}" '
            f'role="img" aria-label="{escape(label)}">{"".join(parts)}</svg>')


def score_line(score_range, seen, bank):
    """The declared inputs' score range, the range seen on data, and a lone unit's
    threshold."""
    lo, hi = score_range
    width, left = 600, 20
    span = (hi - lo) or 1
    pos = lambda v: left + (v - lo) / span * width
    parts = [f'<rect x="{left}" y="20" width="{width}" height="14" fill="#dde6f3" '
             f'stroke="#4a7ebb"/><text x="{left}" y="14">declared inputs: [{lo}, {hi}]</text>']
    if seen:
        parts.append(f'<rect x="{pos(seen[0]):.1f}" y="40" width="{max(1, pos(seen[1]) - pos(seen[0])):.1f}" '
                     f'height="10" fill="#8a8"/><text x="{left}" y="66">seen on data: '
                     f'[{seen[0]:g}, {seen[1]:g}]</text>')
    if lo <= 0 <= hi and not bank:
        parts.append(f'<line x1="{pos(0):.1f}" y1="14" x2="{pos(0):.1f}" y2="54" '
                     f'stroke="#a00" stroke-width="2"/><text x="{pos(0) + 4:.1f}" y="54">'
                     f'threshold (score &gt; 0)</text>')
    return (f'<svg xmlns="http://www.w3.org/2000/svg" width="{left + width + 140}" height="72" '
            f'role="img" aria-label="score range">{"".join(parts)}</svg>')


def histogram_chart(histogram, *, aria="score histogram per class", title="", threshold=True,
                    width=600, height=150, legend="class {}"):
    """Bars per series over the histogram's bins ("" for no histogram)."""
    if not histogram:
        return ""
    edges, counts = histogram.edges, histogram.counts
    colours = ["#4a7ebb", "#c0504d", "#9bbb59", "#8064a2"]
    top = max(max(c) for c in counts.values()) or 1
    left = 20
    bar = width / (len(edges) - 1)
    parts = []
    for k, (label, values) in enumerate(counts.items()):
        for i, value in enumerate(values):
            h = value / top * height
            parts.append(f'<rect x="{left + i * bar + k * bar / len(counts):.1f}" '
                         f'y="{10 + height - h:.1f}" width="{bar / len(counts):.1f}" '
                         f'height="{h:.1f}" fill="{colours[k % len(colours)]}"/>')
        parts.append(f'<text x="{left + width + 8}" y="{20 + 14 * k}" '
                     f'fill="{colours[k % len(colours)]}">{escape(legend.format(label))}</text>')
    if title:
        parts.append(f'<text x="{left}" y="9">{escape(title)}</text>')
    lo, hi = edges[0], edges[-1]
    if threshold and lo <= 0 <= hi:
        x = left + (0 - lo) / ((hi - lo) or 1) * width
        parts.append(f'<line x1="{x:.1f}" y1="5" x2="{x:.1f}" y2="{height + 12}" stroke="#a00"/>')
    parts.append(f'<text x="{left}" y="{height + 26}">score {lo:g} .. {hi:g}</text>')
    return (f'<svg xmlns="http://www.w3.org/2000/svg" width="{left + width + 110}" '
            f'height="{height + 32}" role="img" aria-label="{escape(aria)}">'
            f'{"".join(parts)}</svg>')


def unit_histogram_panels(histograms):
    """A bank's scores on the data: per unit, its own class's rows against the others'."""
    panels = [histogram_chart(h.histogram, aria=f"score histogram of unit {h.unit}",
                              title=f"unit {h.unit}", threshold=False, width=270, height=70,
                              legend="{}") for h in histograms or ()]
    if not panels:
        return ""
    return ("<p>Each unit's score on the rows of its own class and on the other rows: the "
            "argmax decides well where the first lies to the right of the second.</p>"
            + "".join(panels))


def polyline_chart(series, *, label_x, label_y, y_max=None, y_min=0.0):
    """Lines over 0..n-1 (one per series), with axis labels; for small report charts."""
    width, height, left, top = 560, 150, 40, 10
    colours = ["#4a7ebb", "#c0504d", "#9bbb59", "#8064a2", "#f79646"]
    longest = max((len(values) for _, values in series), default=1)
    highest = y_max if y_max is not None else max((max(v) for _, v in series if v), default=1)
    span = (highest - y_min) or 1
    parts = []
    for k, (name, values) in enumerate(series):
        points = " ".join(f"{left + i / max(1, longest - 1) * width:.1f},"
                          f"{top + height - (v - y_min) / span * height:.1f}"
                          for i, v in enumerate(values))
        colour = colours[k % len(colours)]
        parts.append(f'<polyline fill="none" stroke="{colour}" stroke-width="1.5" '
                     f'points="{points}"/><text x="{left + width + 8}" y="{top + 12 + 13 * k}" '
                     f'fill="{colour}">{escape(str(name))}</text>')
    parts.append(f'<rect x="{left}" y="{top}" width="{width}" height="{height}" fill="none" '
                 f'stroke="#999"/><text x="{left}" y="{top + height + 14}">{escape(label_x)}'
                 f'</text><text x="0" y="{top + 10}">{highest:g}</text>'
                 f'<text x="0" y="{top + height}">{y_min:g}</text>'
                 f'<text x="{left + 4}" y="{top + 12}">{escape(label_y)}</text>')
    return (f'<svg xmlns="http://www.w3.org/2000/svg" width="{left + width + 110}" '
            f'height="{top + height + 22}" role="img" aria-label="{escape(label_y)}">'
            f'{"".join(parts)}</svg>')
