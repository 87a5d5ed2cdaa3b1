"""The HTML design report: one self-contained file (images embedded, no network needed).

The report is built from the JSON forms of the stages (plant check, sizing, design,
assessment, export) and from PNG images, so it depends only on those documented keys and never
recomputes anything. :func:`render_report` returns the HTML text; writing it is the caller's
job (see ``dampctl report``).
"""

from __future__ import annotations

import base64
import html
import math
import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

from dampctl import __version__
from dampctl.analysis.assess_json import robustness_lines

__all__ = ["ReportInputs", "provenance_html", "render_report"]

SAFETY_TEXT = (
    "An active loop that is unstable on hardware can damage the structure, and piezo amplifiers "
    "run at hazardous voltage. These results are model predictions. Close the loop on hardware "
    "with limited gain first and ramp the gain up while watching the response; keep hardware "
    "limits (current, voltage, stroke) and an emergency stop within reach; follow the local "
    "electrical-safety codes and your lab's procedures."
)

_STYLE = """
body { font-family: system-ui, -apple-system, "Segoe UI", sans-serif; margin: 2em auto;
       max-width: 1100px; color: #1d1d1f; line-height: 1.45; padding: 0 1em; }
h1 { font-size: 1.7em; margin-bottom: 0.1em; }
h2 { border-bottom: 1px solid #bbb; padding-bottom: 0.2em; margin-top: 1.8em; }
table { border-collapse: collapse; margin: 0.6em 0 1em 0; font-size: 0.92em; }
th, td { border: 1px solid #ccc; padding: 0.25em 0.6em; text-align: right; }
th { background: #eef1f5; }
td.text, th.text { text-align: left; }
.caution { border: 2px solid #b35c00; background: #fff6ec; padding: 0.8em 1em; }
.met { color: #116b2f; font-weight: 600; }
.unmet { color: #a4161a; font-weight: 600; }
.note { color: #555; font-size: 0.9em; }
td:not(.text), .num { white-space: nowrap; }
td.formula { white-space: normal; min-width: 16em; }
.scroll { overflow-x: auto; max-width: 100%; }
figure { display: inline-block; margin: 0.5em 1em 1em 0; max-width: 100%; }
figure img { max-width: min(520px, 100%); height: auto; border: 1px solid #ddd; }
figure.wide img { max-width: 100%; }
figcaption { font-size: 0.88em; color: #444; max-width: 520px; }
code { background: #f3f3f3; padding: 0 0.2em; overflow-wrap: anywhere; }
details { margin: 0.4em 0 1em 0; }
summary { cursor: pointer; color: #333; }
table.provenance td, table.provenance th { border: none; padding: 0.05em 0.8em 0.05em 0;
  text-align: left; background: none; font-size: 0.9em; color: #444; }
table.provenance td.text { white-space: normal; overflow-wrap: anywhere; }
@media print {
  body { max-width: none; margin: 0; font-size: 10pt; }
  .scroll { overflow: visible; }
  details > *, details:not([open]) > * { display: block; }
  table, figure, .caution { break-inside: avoid; page-break-inside: avoid; }
  h2, h3, summary { break-after: avoid; page-break-after: avoid; }
  figure img { max-width: 100%; }
}
"""

#: printing opens every collapsed section first (CSS alone cannot open a <details>)
_PRINT_SCRIPT = (
    "<script>window.addEventListener('beforeprint',function(){"
    "document.querySelectorAll('details').forEach(function(d){d.open=true;});});</script>"
)


@dataclass(frozen=True)
class ReportInputs:
    """Everything a report shows, as the JSON forms of the stages plus images.

    Parameters
    ----------
    check : mapping
        Plant check (``dampctl check --json``).
    design : mapping
        Design file contents (:meth:`dampctl.design.Design.to_dict`).
    assessment : mapping
        Assessment (``dampctl assess --json``).
    sizing : mapping, optional
        Sizing result (``dampctl size --json``).
    export : mapping, optional
        Export summary (``dampctl export --json``).
    figures : mapping of str to bytes, optional
        Caption to PNG bytes, embedded in order.
    title : str, optional
        Report title; default from the plant.
    move : mapping, optional
        One move four ways (:func:`dampctl.report.movesettle.move_and_settle`: ``setup``,
        ``rows``, ``notes``), shown as the "Move and settle" section.
    move_figure : bytes, optional
        PNG of the four time histories, shown in that section.
    provenance : mapping, optional
        Shown at the top: ``created`` (date and time, text), ``command`` (the command line)
        and ``inputs`` (a list of ``{"role", "path", "sha256"}``, the file's SHA-256 in hex).
    """

    check: Mapping[str, Any]
    design: Mapping[str, Any]
    assessment: Mapping[str, Any]
    sizing: Mapping[str, Any] | None = None
    export: Mapping[str, Any] | None = None
    figures: Mapping[str, bytes] = field(default_factory=dict)
    title: str = ""
    move: Mapping[str, Any] | None = None
    move_figure: bytes | None = None
    provenance: Mapping[str, Any] | None = None


def render_report(inputs: ReportInputs) -> str:
    """HTML text of the design report.

    Parameters
    ----------
    inputs : ReportInputs
        The stages' JSON forms and the images.

    Returns
    -------
    str
        A complete, self-contained HTML document.
    """
    plant_name = inputs.check.get("plant") or "plant"
    title = inputs.title or f"Damping design report: {plant_name}"
    parts = [
        "<!DOCTYPE html>",
        '<html lang="en"><head><meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        f"<title>{_e(title)}</title><style>{_STYLE}</style>{_PRINT_SCRIPT}</head><body>",
        f"<h1>{_e(title)}</h1>",
        _provenance(inputs),
        f'<div class="caution"><b>Safety.</b> {_e(SAFETY_TEXT)}</div>',
        _verdict(inputs.assessment, inputs.sizing, inputs.design),
        _plant_section(inputs.check),
    ]
    if inputs.check.get("measured"):
        parts.append(_measured_section(inputs.check["measured"]))
    if inputs.sizing:
        parts.append(_sizing_section(inputs.sizing))
    parts.append(_design_section(inputs.design))
    parts.append(_assessment_section(inputs.assessment))
    if inputs.export:
        parts.append(_export_section(inputs.export))
    if inputs.move:
        parts.append(_move_section(inputs.move, inputs.move_figure))
    if inputs.figures:
        parts.append("<h2>Figures</h2>")
        for caption, image in inputs.figures.items():
            parts.append(f"<figure>{_img(image, caption)}"
                         f"<figcaption>{_e(caption)}</figcaption></figure>")
    parts.append("</body></html>")
    return _guard_numbers("\n".join(parts)) + "\n"


# ---------------------------------------------------------------------- sections
def _provenance(inputs: ReportInputs) -> str:
    """Date, dampctl version, command line and input files with their fingerprints."""
    law = str(inputs.design.get("law", "")).upper()
    return provenance_html(inputs.provenance, inputs.check.get("fingerprint", ""), law)


def provenance_html(prov: Mapping[str, Any] | None, fingerprint: str, law: str = "") -> str:
    """The report's head: date, dampctl version, law, plant fingerprint, command, inputs.

    Parameters
    ----------
    prov : mapping, optional
        ``created``, ``command`` and ``inputs`` (see :class:`ReportInputs`).
    fingerprint : str
        The plant's fingerprint.
    law : str, optional
        The law(s) shown.

    Returns
    -------
    str
    """
    prov = prov or {}
    rows = [("Created", _e(prov.get("created") or "–")),
            ("dampctl", _e(__version__)),
            ("Law", f"<b>{_e(law)}</b>"),
            ("Plant fingerprint", f"<code>{_e(fingerprint)}</code>")]
    if prov.get("command"):
        rows.append(("Command", f"<code>{_e(prov['command'])}</code>"))
    for item in prov.get("inputs") or []:
        digest = str(item.get("sha256") or "")
        rows.append((f"Input: {item.get('role', '')}",
                     f"{_e(item.get('path', ''))} · sha256 <code>{_e(digest[:16])}</code>"
                     if digest else _e(item.get("path", ""))))
    body = "".join(f"<tr><th class='text'>{_e(k)}</th><td class='text'>{v}</td></tr>"
                   for k, v in rows)
    return f'<div class="scroll"><table class="provenance">{body}</table></div>'


def _modes_text(modes: Sequence[Any]) -> str:
    return ", ".join(str(m) for m in modes) or "–"


def _verdict(assessment: Mapping[str, Any], sizing: Mapping[str, Any] | None = None,
             design: Mapping[str, Any] | None = None) -> str:
    reqs = assessment.get("requirements") or []
    stable = assessment.get("stable")
    unmet = [r for r in reqs if not r.get("met")]
    if stable is False:
        text = '<span class="unmet">The closed loop is UNSTABLE.</span>'
    elif unmet:
        names = ", ".join(str(r.get("name")) for r in unmet)
        text = f'<span class="unmet">Requirements not met: {_e(names)}.</span>'
    elif reqs:
        text = '<span class="met">Every requirement of the plant file is met.</span>'
    else:
        text = "The plant file states no requirements."
    out = f"<h2>Verdict</h2><p>{text}</p>"
    sized = sorted(int(m) for m in (sizing or {}).get("modes") or [])
    assessed = sorted(int(m) for m in assessment.get("target_modes")
                      or (design or {}).get("target_modes") or [])
    if sized and assessed and sized != assessed:
        out += (f"<p class='unmet'>Sizing and assessment used different target modes: sizing "
                f"{_e(_modes_text(sized))}, assessment {_e(_modes_text(assessed))}. The "
                "sizing's pair count and damping do not speak for the assessed modes.</p>")
    return out


def _plant_section(check: Mapping[str, Any]) -> str:
    out = ["<h2>Plant</h2>"]
    modes = check.get("modes", [])
    out.append(f"<p>{len(modes)} modes; first natural frequency "
               f"{_num(check.get('first_freq_hz'))} Hz.</p>")
    out.append(_table(modes, [("mode", "Mode (#)"), ("label", "Label", "text"),
                              ("freq_hz", "Frequency (Hz)"), ("damping", "Damping ratio (–)"),
                              ("modal_mass_kg", "Modal mass (kg)")]))
    pairs = check.get("pairs", [])
    if pairs:
        out.append("<h3>Candidate pairs</h3><p class='note'>Participation: share of each mode's "
                   "Hankel singular value.</p>")
        n = len(modes)
        unseen = set(check.get("unseen_modes", []))
        if unseen:
            out.append("<p class='note'>– : no pair sees the mode (at every pair its own "
                       "response is below 1e-3 of the other modes' at its frequency), so its "
                       "shares say nothing.</p>")
        rows = []
        for p in pairs:
            row = {"pair": p.get("pair"), "kind": p.get("kind", ""),
                   "collocated": p.get("collocated")}
            for k, share in enumerate(p.get("participation", [])[:n]):
                row[f"m{k + 1}"] = None if k + 1 in unseen else share
            rows.append(row)
        cols = [("pair", "Pair", "text"), ("kind", "Kind", "text"),
                ("collocated", "Collocated", "text")]
        cols += [(f"m{k + 1}", f"Mode {k + 1} (share, –)") for k in range(n)]
        out.append(_table(rows, cols))
    out.append(_list("Warnings", check.get("warnings", [])))
    return "\n".join(out)


def _measured_section(measured: Mapping[str, Any]) -> str:
    """The plant held against measured FRFs (``dampctl check --measured`` JSON form)."""
    band = measured.get("band_hz") or [None, None]
    tol = measured.get("tolerances") or {}
    out = ["<h2>Plant against measurement</h2>",
           f"<p>Measured FRFs {_e(measured.get('file', ''))}, {_num(band[0])}–{_num(band[1])} "
           f"Hz, on the channels the plant shares with them. Tolerances: frequency "
           f"{_num(tol.get('freq'))}, damping {_num(tol.get('damping'))} (relative), MAC "
           f"{_num(tol.get('mac'))}, FRF error {_num(tol.get('error'))}.</p>"]
    out.append(_table(measured.get("modes", []), [
        ("mode", "Mode (#)"), ("plant_freq_hz", "Plant (Hz)"),
        ("measured_freq_hz", "Measured (Hz)"), ("freq_change", "Frequency change (relative, –)"),
        ("plant_damping", "Plant damping (–)"), ("measured_damping", "Measured damping (–)"),
        ("mac", "MAC (–)"),
        ("channel", "Strongest on", "text")]))
    out.append(_table(measured.get("channels", []), [
        ("channel", "Channel", "text"), ("unit", "Unit", "text"),
        ("error", "FRF error (normalized RMS, –)")]))
    out.append(_list("Measurement warnings", measured.get("warnings", [])))
    return "\n".join(out)


def _sizing_section(sizing: Mapping[str, Any]) -> str:
    out = ["<h2>Sizing: how many pairs</h2>",
           f"<p>Law {_e(str(sizing.get('law', '')).upper())}, target damping "
           f"{_num(sizing.get('target_damping'))} on target modes "
           f"{_e(_modes_text(sizing.get('modes') or []))}.</p>"]
    rows = [dict(r, chosen=", ".join(r.get("chosen", []))) for r in sizing.get("rows", [])]
    out.append(_table(rows, [("pairs_used", "Pairs (#)"), ("chosen", "Chosen", "text"),
                             ("min_damping", "Smallest damping on the target modes (–)"),
                             ("cost", "Cost (price units of the plant file)"),
                             ("method", "Search", "text")]))
    pairs = sizing.get("recommended_pairs")
    if pairs:
        out.append(f"<p>Recommended: <b>{len(pairs)} pair(s), {_e(', '.join(pairs))}</b></p>")
    else:
        out.append('<p class="unmet">No pair count up to the limit meets the target.</p>')
    if sizing.get("statement"):
        out.append(f"<p>{_e(sizing['statement'])}</p>")
    if sizing.get("rank_rule"):
        out.append(f"<p class='note'>{_e(_plain(sizing['rank_rule']))}</p>")
    return "\n".join(out)


def _design_section(design: Mapping[str, Any]) -> str:
    if design.get("passive"):
        return _passive_section(design)
    out = ["<h2>Design</h2>",
           f"<p>Law <b>{_e(str(design.get('law', '')).upper())}</b> on pairs "
           f"{_e(', '.join(design.get('pairs', [])) or '-')}; target modes "
           f"{_e(', '.join(str(m) for m in design.get('target_modes', [])))}. "
           f"Sign convention: <code>{_e(design.get('sign_convention', 'u = -K(s) y'))}</code>."
           "</p>"]
    loops = design.get("loops") or []
    if loops:
        rows = []
        for lp in loops:
            blocks = " + ".join(_branch_text(b) for b in lp.get("branches", []))
            rows.append({"pair": lp.get("pair"), "actuator": lp.get("actuator"),
                         "sensor": lp.get("sensor"), "gain": lp.get("gain"), "K": blocks})
        out.append(_table(rows, [("pair", "Pair", "text"), ("actuator", "Actuator", "text"),
                                 ("sensor", "Sensor", "text"),
                                 ("gain", "Law gain (actuator unit per sensor unit)"),
                                 ("K", "Controller K(s) (actuator unit per sensor unit; s = jω, "
                                       "ω in rad/s)", "formula")]))
        out.append("<p class='note'>K(s) is the product of the law gain and the sections "
                   "shown, each a ratio of polynomials in s with ω in rad/s (not Hz); the loop "
                   "is closed as u = −K(s) y.</p>")
    elif design.get("controller"):
        n = len(design["controller"].get("A", []))
        out.append(f"<p>MIMO controller state space with {n} states "
                   f"({len(design.get('sensors', []))} sensors in, "
                   f"{len(design.get('actuators', []))} actuators out).</p>")
    info = design.get("info") or {}
    if info:
        out.append(_design_summary(info))
        out.append("<details><summary>All design facts (the design file's <code>info</code>)"
                   f"</summary>{_mapping(info)}</details>")
    return "\n".join(out)


#: columns of the parts table, per passive law
_PART_COLUMNS = {
    "tmd": [("mode", "Mode (#)"), ("site", "Site", "text"), ("mass_kg", "Mass (kg)"),
            ("freq_hz", "Frequency (Hz)"), ("damping", "Damping ratio (–)"),
            ("stiffness_n_per_m", "Spring (N/m)"), ("damping_n_s_per_m", "Dashpot (N·s/m)")],
    "viscous": [("between", "Between", "text"), ("coefficient_n_s_per_m", "Coefficient (N·s/m)"),
                ("stiffness_n_per_m", "Mounting (N/m)")],
    "shunt": [("pair", "Pair", "text"), ("actuator", "Strut", "text"), ("kind", "Network", "text"),
              ("mode", "Mode (#)"), ("resistance_ohm", "R (Ω)"), ("inductance_h", "L (H)")],
}


def _passive_section(design: Mapping[str, Any]) -> str:
    """A passive design: its parts, no loop."""
    law = str(design.get("law", ""))
    out = ["<h2>Design</h2>",
           f"<p>Passive design <b>{_e(law.upper())}</b>: no loop, no sensor, no sampling — the "
           "parts act through their own physics. Target modes "
           f"{_e(', '.join(str(m) for m in design.get('target_modes', [])))}.</p>"]
    parts = [dict(p) for p in design.get("parts") or []]
    for p in parts:
        if p.get("part") == "absorber":
            w = 2 * math.pi * p["freq_hz"]
            p["stiffness_n_per_m"] = p["mass_kg"] * w * w
            p["damping_n_s_per_m"] = 2 * p["damping"] * p["mass_kg"] * w
    out.append(_table(parts, _PART_COLUMNS.get(law, [("part", "Part", "text")])))
    info = design.get("info") or {}
    if info:
        out.append(_design_summary(info))
        out.append("<details><summary>All design facts (the design file's <code>info</code>)"
                   f"</summary>{_mapping(info)}</details>")
    return "\n".join(out)


def _design_summary(info: Mapping[str, Any]) -> str:
    """The tuning outcome in a sentence, with the design's warnings."""
    parts = []
    if info.get("tuning"):
        parts.append(f"Tuning: {info['tuning']}.")
    target, reached = info.get("target_damping"), info.get("target_met")
    smallest = info.get("min_damping")
    if smallest is None and isinstance(info.get("closed_loop"), Mapping):
        smallest = info["closed_loop"].get("target_damping_min")  # model-based designs
    if target is not None:
        state = {True: "reached", False: "NOT reached"}.get(reached, "")
        parts.append(f"Target damping {_num(target)} {state}".rstrip() + ".")
    if smallest is not None:
        parts.append(f"Smallest damping on the target modes: {_num(smallest)}.")
    if "stable" in info:
        parts.append("Closed loop stable." if info["stable"] else "Closed loop UNSTABLE.")
    text = f"<p>{_e(' '.join(parts))}</p>" if parts else ""
    return text + _list("Design warnings", info.get("warnings") or [])


def _assessment_section(assessment: Mapping[str, Any]) -> str:
    out = ["<h2>Closed-loop modes</h2>",
           f"<p>Closed loop {'stable' if assessment.get('stable') else 'UNSTABLE'}. Each "
           "closed-loop pole is matched to its open-loop mode by assignment.</p>"]
    out.append(_table(assessment.get("modes", []), [
        ("mode", "Mode (#)"), ("open_freq_hz", "Open freq (Hz)"),
        ("open_damping", "Open damping (–)"), ("closed_freq_hz", "Closed freq (Hz)"),
        ("closed_damping", "Closed damping (–)"),
        ("peak_reduction_db", "Peak reduction (dB)")]))
    if assessment.get("passive"):
        out.append("<h2>Stability margins</h2><p>None: passive, no loop to break (no delay, "
                   "no roll-off). A passive structure cannot be destabilized by its parts.</p>")
    else:
        out.append("<h2>Stability margins</h2><p class='note'>Each loop broken at the plant "
                   "input with the others closed; delays exact in the frequency domain. Phase "
                   "margin is the phase lag that brings the loop to −180°.</p>")
        out.append(_table(assessment.get("loops", []), [
            ("pair", "Loop", "text"), ("gain_margin_db", "Gain margin (dB)"),
            ("phase_margin_deg", "Phase margin (deg)"), ("delay_margin_s", "Delay margin (s)"),
            ("crossover_hz", "Crossover (Hz)")]))
    if assessment.get("robustness"):
        out.append(_robustness_section(assessment["robustness"]))
    effort = "Part loads" if assessment.get("passive") else "Actuator effort"
    for key, heading in (("rms", "Disturbance response (RMS)"), ("effort", effort)):
        if assessment.get(key):
            out.append(f"<h2>{heading}</h2>")
            out.append(_any(assessment[key]))
    reqs = assessment.get("requirements") or []
    out.append("<h2>Requirements</h2>")
    if reqs:
        rows = [dict(r, met_text="met" if r.get("met") else "NOT MET") for r in reqs]
        out.append(_table(rows, [("name", "Requirement", "text"),
                                 ("required", "Required (unit of the requirement)"),
                                 ("achieved", "Achieved (same unit)"),
                                 ("met_text", "Status", "status")]))
        out.append("<p class='note'>Units: damping ratios are dimensionless, margins in dB and "
                   "degrees, RMS values in the output's SI unit (m, m/s, m/s², N).</p>")
        out.append(_list("Not applicable", assessment.get("notes") or []))
    else:
        out.append("<p>None stated in the plant file.</p>")
    return "\n".join(out)


def _robustness_section(robustness: Mapping[str, Any]) -> str:
    """Robustness checks as plain lines (as ``dampctl assess`` prints them), then the values."""
    out = ["<h2>Robustness</h2>"]
    try:
        lines = robustness_lines(dict(robustness))
    except (KeyError, TypeError):  # an assessment file from another version: values only
        lines = []
    if lines:
        shown = [line.replace("+-", "±").replace(" -> ", " → ") for line in lines]
        out.append("<ul>" + "".join(f"<li>{_e(line)}</li>" for line in shown) + "</ul>")
        out.append("<p class='note'>Drift: the natural frequencies scaled by up to ± the "
                   "stated fraction (the corners of that box, and random cases inside it). Extra "
                   "delay: the common delay, added to the stated loop delay, that makes the loop "
                   "unstable (frequency domain, confirmed on the closed-loop poles). Roll-off: "
                   "one first-order lag on every actuator (or every sensor) channel, its corner "
                   "lowered until the loop goes unstable.</p>")
        out.append(f"<details><summary>All robustness values</summary>{_any(robustness)}"
                   "</details>")
    else:
        out.append(_any(robustness))
    return "\n".join(out)


def _export_section(export: Mapping[str, Any]) -> str:
    fixed = export.get("fixed")
    fixed_text = f", fixed point {_e(str(fixed))}" if fixed not in (None, "", "none") else ""
    out = ["<h2>Discrete-time export</h2>",
           f"<p>{_num(export.get('rate_hz'))} Hz, method {_e(str(export.get('method', '')))}"
           f"{fixed_text}.</p>"]
    loops = export.get("loops") or []
    rows = [{"pair": lp.get("pair"), "cascade_gain": lp.get("cascade_gain"),
             "sections": len(lp.get("sos") or [])} for lp in loops]
    if rows:
        out.append(_table(rows, [("pair", "Loop", "text"),
                                 ("cascade_gain", "Cascade gain (actuator unit per sensor unit)"),
                                 ("sections", "Second-order sections (#)")]))
    verification = (export.get("verification") or {}).get("modes") or []
    if verification:
        out.append("<h3>Verified in discrete time</h3>")
        out.append(_table(verification, [
            ("mode", "Mode (#)"),
            ("continuous_damping", "Continuous damping (no sampling delay, –)"),
            ("discrete_damping", "Sampled damping (hold + one sample, –)"),
        ]))
    fixed_point = export.get("fixed_point")
    if isinstance(fixed_point, Mapping) and fixed_point.get("loops"):
        out.append(_fixed_point(fixed_point))
    files = export.get("files") or []
    if files:
        out.append(_list("Files", [str(f) for f in files]))
    return "\n".join(out)


def _fixed_point(fixed: Mapping[str, Any]) -> str:
    """The fixed-point sections: integers, fractional bits and the poles' shift."""
    word = str(fixed.get("number_format", "")).upper()
    out = [f"<h3>Fixed point ({_e(word)})</h3>",
           f"<p class='note'>{_e(fixed.get('convention', ''))}</p>"]
    loops, rows = [], []
    for lp in fixed.get("loops") or []:
        loops.append({k: lp.get(k) for k in ("name", "input_full_scale", "output_limit",
                                              "peak_command", "noise_rms")})
        for branch in lp.get("branches") or []:
            for k, sec in enumerate(branch.get("sections") or [], start=1):
                before, after = sec.get("pole_before") or {}, sec.get("pole_after") or {}
                rows.append({
                    "loop": lp.get("name"), "section": k,
                    "integers": " ".join(str(i) for i in sec.get("integers") or []),
                    "bits": f"{sec.get('num_frac_bits')}/{sec.get('a1_frac_bits')}/"
                            f"{sec.get('a2_frac_bits')}",
                    "freq_before": before.get("freq_hz"), "freq_after": after.get("freq_hz"),
                    "damping_before": before.get("damping"),
                    "damping_after": after.get("damping"),
                    "accepted": "yes" if sec.get("accepted") else "NO", "met": sec.get("accepted"),
                })
    out.append(_table(loops, [("name", "Loop", "text"),
                              ("input_full_scale", "Input full scale (sensor unit)"),
                              ("output_limit", "Output limit (actuator unit)"),
                              ("peak_command", "Peak command (actuator unit)"),
                              ("noise_rms", "Quantization noise RMS (actuator unit)")]))
    out.append(_table(rows, [("loop", "Loop", "text"), ("section", "Section (#)"),
                             ("integers", "b0 b1 b2 a1 a2 (integers)", "text"),
                             ("bits", "Fractional bits num/a1/a2 (#)", "text"),
                             ("freq_before", "Pole before (Hz)"), ("freq_after", "Pole after (Hz)"),
                             ("damping_before", "Damping before (–)"),
                             ("damping_after", "Damping after (–)"),
                             ("accepted", "Accepted", "status")]))
    return "\n".join(out)


def _move_section(move: Mapping[str, Any], figure: bytes | None) -> str:
    """One move open loop, shaped, damped, and damped and shaped, side by side."""
    setup = move.get("setup") or {}
    distance = setup.get("distance_m")
    out = ["<h2>Move and settle</h2>",
           f"<p>A {_e(str(setup.get('profile', '')))} move of {_num(distance)} m at "
           f"<b>{_e(str(setup.get('output', '')))}</b> made by "
           f"<b>{_e(str(setup.get('drive', '')))}</b> (its input scaled by the plant's static "
           f"compliance), simulated at {_num(setup.get('sample_rate_hz'))} Hz. The damped runs "
           "are the loop as it will run: the plant sampled exactly, the exported controller, one "
           "sample of computation plus the stated loop delay, the actuator limits. Settling: "
           f"into ±{_num(setup.get('settle_band_m'))} m of the static value, from the start of "
           "the command.</p>"]
    rows = []
    for row in move.get("rows") or []:
        shaper = row.get("shaper")
        rows.append({
            "label": row.get("label"),
            "shaper": "–" if not shaper else
            f"{str(shaper.get('kind', '')).upper()}, {_num(1e3 * shaper['duration_s'])} ms",
            "settling_ms": None if row.get("settling_time_s") is None
            else 1e3 * row["settling_time_s"],
            "overshoot": row.get("overshoot"),
            "residual_rms": row.get("residual_rms"),
            "peak_force_n": row.get("peak_force_n"),
            "saturated_s": row.get("saturated_s"),
        })
    out.append(_table(rows, [("label", "Run", "text"), ("shaper", "Shaper", "text"),
                             ("settling_ms", "Settling time (ms)"),
                             ("overshoot", "Overshoot (% of the move)"),
                             ("residual_rms", "Residual RMS after the command (m)"),
                             ("peak_force_n", "Peak force (N)"),
                             ("saturated_s", "Saturated (s)")]))
    out.append("<p class='note'>–: not settled within the record. A shaper delays the end of "
               "the command by its duration; the shaped runs' settling times include it.</p>")
    if figure:
        caption = "The same move: open loop, shaped, damped, damped and shaped"
        out.append(f'<figure class="wide">{_img(figure, caption)}'
                   f"<figcaption>{_e(caption)}</figcaption></figure>")
    out.append(_list("Notes", move.get("notes") or []))
    return "\n".join(out)


# ---------------------------------------------------------------------- helpers
def _img(image: bytes, caption: str) -> str:
    """An embedded figure: PNG or SVG bytes as a data URI (the report needs no network)."""
    head = image[:256].lstrip()
    mime = "image/svg+xml" if head.startswith((b"<?xml", b"<svg")) else "image/png"
    data = base64.b64encode(image).decode("ascii")
    return f'<img alt="{_e(caption)}" src="data:{mime};base64,{data}">'


def _branch_text(branch: Mapping[str, Any]) -> str:
    text = _num(branch.get("gain"))
    for sec in branch.get("sections", []):
        text += f" · ({_poly(sec.get('num', []))})/({_poly(sec.get('den', []))})"
    return text


def _poly(coeffs: Sequence[float]) -> str:
    n = len(coeffs) - 1
    terms = []
    for k, c in enumerate(coeffs):
        power = n - k
        if c == 0:
            continue
        s = "" if power == 0 else ("s" if power == 1 else f"s^{power}")
        terms.append(f"{_num(c)}{(' ' + s) if s else ''}" if not (c == 1 and s) else s)
    return " + ".join(terms) or "0"


def _table(rows: Sequence[Mapping[str, Any]], columns: Sequence[tuple]) -> str:
    if not rows:
        return "<p>(none)</p>"
    head = "".join(f'<th class="{c[2] if len(c) > 2 else ""}">{_e(c[1])}</th>' for c in columns)
    body = []
    for row in rows:
        cells = []
        for col in columns:
            value = row.get(col[0])
            kind = col[2] if len(col) > 2 else ""
            if kind == "status":
                cls = "met" if row.get("met") else "unmet"
                cells.append(f'<td class="text {cls}">{_e(str(value))}</td>')
            elif kind in ("text", "formula"):
                cls = "text" if kind == "text" else "text formula"
                cells.append(f'<td class="{cls}">{_e(_plain(value))}</td>')
            else:
                cells.append(f"<td>{_e(_plain(value))}</td>")
        body.append("<tr>" + "".join(cells) + "</tr>")
    return f"<div class='scroll'><table><tr>{head}</tr>{''.join(body)}</table></div>"


def _any(value: Any) -> str:
    if isinstance(value, Mapping):
        return _mapping(value)
    if isinstance(value, list) and value and all(isinstance(v, Mapping) for v in value):
        keys: list[str] = []
        for v in value:
            keys += [k for k in v if k not in keys and not isinstance(v[k], list | Mapping)]
        return _table(value, [(k, _label(k), "text" if _is_text(value, k) else "")
                              for k in keys])
    return f"<p>{_e(_plain(value))}</p>"


def _mapping(value: Mapping[str, Any]) -> str:
    rows = []
    for key, item in value.items():
        if isinstance(item, Mapping | list) and item and _nested(item):
            rows.append(f"<tr><th class='text'>{_e(_label(key))}</th>"
                        f"<td class='text'>{_any(item)}</td></tr>")
        else:
            rows.append(f"<tr><th class='text'>{_e(_label(key))}</th>"
                        f"<td class='text'>{_e(_plain(item))}</td></tr>")
    return "<div class='scroll'><table>" + "".join(rows) + "</table></div>"


#: unit suffixes of JSON keys and how a heading shows them
_UNITS = {"s": "s", "hz": "Hz", "db": "dB", "deg": "deg", "n": "N", "m": "m", "kg": "kg",
          "per_s": "1/s"}


def _label(key: str) -> str:
    """Heading for a JSON key: ``delay_margin_s`` -> ``delay margin (s)``, ``rms`` as is."""
    if key == "max_real_part":
        return "max real part (1/s)"
    for suffix in sorted(_UNITS, key=len, reverse=True):
        if key.endswith("_" + suffix) and len(key) > len(suffix) + 1:
            return f"{key[: -len(suffix) - 1].replace('_', ' ')} ({_UNITS[suffix]})"
    return key.replace("_", " ")


def _nested(item: Any) -> bool:
    if isinstance(item, Mapping):
        return True
    return any(isinstance(v, Mapping | list) for v in item)


def _is_text(rows: Sequence[Mapping[str, Any]], key: str) -> bool:
    return any(isinstance(r.get(key), str) for r in rows)


def _list(heading: str, items: Sequence[str]) -> str:
    if not items:
        return ""
    return f"<h3>{_e(heading)}</h3><ul>" + "".join(f"<li>{_e(i)}</li>" for i in items) + "</ul>"


def _plain(value: Any) -> str:
    if value is None:
        return "–"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        return _num(value)
    if isinstance(value, list | tuple):
        if len(value) > 12 and all(isinstance(v, int | float) for v in value):
            return f"[{len(value)} values]"
        return ", ".join(_plain(v) for v in value)
    return str(value)


def _num(value: Any) -> str:
    if value is None:
        return "–"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if not isinstance(value, int | float):
        return str(value)
    if isinstance(value, float) and not math.isfinite(value):
        return "∞" if value > 0 else ("−∞" if value < 0 else "NaN")
    if value == 0:
        return "0"
    if isinstance(value, int):
        return str(value)
    if 1e4 <= abs(value) < 1e6:
        return f"{value:.0f}"  # 20000 Hz, not 2e+04
    return f"{value:.4g}"


#: a number a browser could break inside: a sign, or an exponent with its sign
_BREAKABLE = re.compile(r"(?<![\w.])[-−+±]?\d+(?:\.\d+)?(?:e[-+−]?\d+)?(?![\w.])")
_SEGMENTS = re.compile(r"(<[^>]*>)")


def _guard_numbers(text: str) -> str:
    """Wrap every signed or exponent number of the page's text in a no-wrap span.

    Tags, and the contents of ``<style>`` and ``<script>``, are left alone; so "4.604e-08" or
    "−180" never break across lines.
    """
    out, skip = [], False
    for piece in _SEGMENTS.split(text):
        if piece.startswith("<"):
            lower = piece.lower()
            if lower.startswith(("<style", "<script")):
                skip = True
            elif lower.startswith(("</style", "</script")):
                skip = False
            out.append(piece)
        elif skip or not piece:
            out.append(piece)
        else:
            out.append(_BREAKABLE.sub(_span, piece))
    return "".join(out)


def _span(match: re.Match) -> str:
    token = match.group(0)
    if any(c in token for c in "-−+±e") and len(token) > 1:
        return f'<span class="num">{token}</span>'
    return token


def _e(text: Any) -> str:
    return html.escape(str(text), quote=True)
