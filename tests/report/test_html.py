"""The HTML report: self-contained, shows the stages' tables, renders in a real browser."""

from __future__ import annotations

import html
import io
import re
import shutil
import subprocess

import pytest
from repo import ROOT

from dampctl.report.html import ReportInputs, render_report


def _png() -> bytes:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, ax = plt.subplots(figsize=(2, 1.5))
    ax.plot([0, 1], [0, 1])
    buf = io.BytesIO()
    fig.savefig(buf, format="png")
    plt.close(fig)
    return buf.getvalue()


def _inputs(met: bool = True) -> ReportInputs:
    check = {"plant": "test stage", "fingerprint": "abc", "first_freq_hz": 100.0,
             "modes": [{"mode": 1, "label": "x", "freq_hz": 100.0, "damping": 0.01,
                        "modal_mass_kg": 1.0}],
             "pairs": [{"pair": "p1", "collocated": True, "kind": "force/velocity",
                        "participation": [1.0]}],
             "warnings": ["a warning"]}
    design = {"law": "dvf", "pairs": ["p1"], "target_modes": [1],
              "loops": [{"pair": "p1", "actuator": "f", "sensor": "v", "gain": 5.0,
                         "branches": [{"gain": 5.0, "sections": [{"num": [1.0],
                                                                  "den": [1e-4, 1.0]}]}]}]}
    assessment = {"stable": True,
                  "modes": [{"mode": 1, "open_freq_hz": 100.0, "open_damping": 0.01,
                             "closed_freq_hz": 99.0, "closed_damping": 0.08,
                             "peak_reduction_db": 18.0}],
                  "loops": [{"pair": "p1", "gain_margin_db": 12.0, "phase_margin_deg": 80.0,
                             "delay_margin_s": 1e-3, "crossover_hz": 120.0}],
                  "requirements": [{"name": "min_damping", "required": 0.05,
                                    "achieved": 0.08 if met else 0.03, "met": met}]}
    return ReportInputs(check=check, design=design, assessment=assessment,
                        figures={"a figure": _png()})


def test_report_is_self_contained_and_has_the_tables():
    text = render_report(_inputs())
    assert text.startswith("<!DOCTYPE html>")
    assert "Closed-loop modes" in text and "Stability margins" in text
    assert "Safety." in text and "emergency stop" in text
    assert 'src="data:image/png;base64,' in text
    # nothing is fetched from elsewhere
    assert not re.search(r'(src|href)="(https?:)?//', text)
    assert "Every requirement of the plant file is met" in text


def test_report_shows_a_missed_requirement():
    text = render_report(_inputs(met=False))
    assert "Requirements not met: min_damping" in text
    assert "NOT MET" in text


def _chromium() -> str | None:
    for name in ("chromium", "chromium-browser", "google-chrome"):
        path = shutil.which(name)
        if path:
            return path
    return None


@pytest.mark.skipif(_chromium() is None, reason="no Chromium installed to render the report")
def test_report_renders_in_headless_chromium(tmp_path):
    probe = ("<script>window.addEventListener('load', function () {"
             "var imgs = document.images, ok = 0;"
             "for (var i = 0; i < imgs.length; i++) {"
             " if (imgs[i].complete && imgs[i].naturalWidth > 0) ok++; }"
             "document.body.setAttribute('data-images', ok + '/' + imgs.length); });</script>")
    text = render_report(_inputs()).replace("</body>", probe + "</body>")
    page = tmp_path / "report.html"
    page.write_text(text, encoding="utf-8")
    result = subprocess.run(
        [_chromium(), "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic",
         "--no-first-run", "--disable-background-networking", "--disable-component-update",
         "--disable-sync", f"--user-data-dir={tmp_path / 'profile'}",
         "--virtual-time-budget=5000", "--dump-dom", page.as_uri()],
        capture_output=True, text=True, timeout=120,
    )
    match = re.search(r'data-images="(\d+)/(\d+)"', result.stdout)
    assert match, result.stderr[-2000:]
    loaded, total = int(match.group(1)), int(match.group(2))
    assert total >= 1 and loaded == total


def test_unseen_mode_shares_are_not_shown():
    inputs = _inputs()
    check = dict(inputs.check, unseen_modes=[1])
    check["pairs"] = [dict(check["pairs"][0], participation=[0.4321])]
    text = render_report(ReportInputs(check=check, design=inputs.design,
                                      assessment=inputs.assessment, figures={}))
    assert "no pair sees the mode" in text and "0.4321" not in text


def test_export_rate_is_printed_plainly():
    inputs = _inputs()
    text = render_report(ReportInputs(check=inputs.check, design=inputs.design,
                                      assessment=inputs.assessment, figures={},
                                      export={"rate_hz": 20000.0, "method": "tustin"}))
    assert "20000 Hz, method tustin" in text and "2e+04" not in text


def test_json_key_headings_show_units():
    from dampctl.report.html import _label

    assert _label("delay_margin_s") == "delay margin (s)"
    assert _label("min_stable_hz") == "min stable (Hz)"
    assert _label("reduction_db") == "reduction (dB)"
    assert _label("max_real_part") == "max real part (1/s)"
    assert _label("rms") == "rms" and _label("cases") == "cases"


def test_export_without_fixed_point_does_not_say_none():
    inputs = _inputs()
    text = render_report(ReportInputs(check=inputs.check, design=inputs.design,
                                      assessment=inputs.assessment, figures={},
                                      export={"rate_hz": 1000.0, "method": "zoh",
                                              "fixed": "none"}))
    assert "method zoh." in text and "fixed point none" not in text


def test_robustness_and_design_read_as_sentences_with_all_values_kept():
    # from a real assessment: the robustness lines are those `dampctl assess` prints (one
    # formatter), the design's outcome is a sentence, and every value stays in <details>

    import dampctl
    from dampctl.analysis.assess_json import robustness_lines
    from dampctl.laws import dvf

    plant = dampctl.load_plant(ROOT / "plants" / "oscillator.toml")
    design = dvf.design(plant, [plant.pairs[0].name])
    assessment = dampctl.assess(plant, design).to_dict()
    inputs = _inputs()
    text = render_report(
        ReportInputs(check=inputs.check, design=design.to_dict(), assessment=assessment)
    )
    text = re.sub(r'<span class="num">([^<]*)</span>', r"\1", text)  # numbers kept whole
    for line in robustness_lines(assessment["robustness"]):
        shown = line.replace("+-", "±").replace(" -> ", " → ")
        assert f"<li>{html.escape(shown)}</li>" in text
    assert "extra delay to instability:" in text
    assert "<summary>All robustness values</summary>" in text
    assert "Smallest damping on the target modes:" in text
    assert "<summary>All design facts" in text


def test_passive_design_shows_its_parts_and_no_margins():
    inputs = _inputs()
    design = {"law": "tmd", "passive": True, "target_modes": [1],
              "parts": [{"part": "absorber", "mode": 1, "site": "tip", "mass_kg": 0.02,
                         "freq_hz": 95.0, "damping": 0.08}],
              "info": {"tuning": "Den Hartog / Brock rule"}}
    assessment = dict(inputs.assessment, passive=True, loops=[],
                      notes=["min_gain_margin_db: does not apply (passive: no loop)"])
    text = render_report(ReportInputs(check=inputs.check, design=design, assessment=assessment))
    assert "Passive design" in text and "no loop to break" in text
    assert "tip" in text and "Spring (N/m)" in text
    assert "does not apply (passive: no loop)" in text
    assert "Gain margin (dB)" not in text


def test_numbers_never_break_and_tables_scroll():
    inputs = _inputs()
    check = dict(inputs.check, warnings=["residual 4.604e-08 at -180 deg"])
    text = render_report(ReportInputs(check=check, design=inputs.design,
                                      assessment=inputs.assessment))
    assert '<span class="num">4.604e-08</span>' in text
    assert '<span class="num">-180</span>' in text
    assert "white-space: nowrap" in text
    # every table sits in a horizontally scrolling wrapper
    assert text.count("<table") == text.count("<div class='scroll'><table") + text.count(
        '<div class="scroll"><table')
    # style and script are untouched
    assert '<span class="num">' not in text.split("</style>")[0]


def test_print_stylesheet_and_units_in_headers():
    text = render_report(_inputs())
    assert "@media print" in text and "break-inside: avoid" in text
    assert "break-after: avoid" in text and "d.open=true" in text
    heads = re.findall(r"<th class=\"\">([^<]*)</th>", text)  # the numeric columns
    assert heads and all("(" in h for h in heads), [h for h in heads if "(" not in h]
    assert "ω in rad/s" in text


def test_provenance_at_the_top():
    inputs = _inputs()
    prov = {"created": "2026-01-02 03:04 UTC", "command": "dampctl report p.toml d.json -o r",
            "inputs": [{"role": "plant", "path": "p.toml", "sha256": "ab" * 32}]}
    text = render_report(ReportInputs(check=inputs.check, design=inputs.design,
                                      assessment=inputs.assessment, provenance=prov))
    top = text.split("Safety.")[0]
    assert "2026-01-02 03:04 UTC" in top and "dampctl report p.toml d.json -o r" in top
    assert "p.toml" in top and "abababababababab" in top and "abc" in top  # fingerprints


def test_fixed_point_table_and_different_targets():
    inputs = _inputs()
    export = {"rate_hz": 10000.0, "method": "tustin", "fixed": "q15", "loops": [],
              "fixed_point": {"number_format": "q15", "convention": "round(c * 2**F)",
                              "loops": [{"name": "p1", "input_full_scale": 0.2,
                                         "output_limit": 40.0, "peak_command": 40.0,
                                         "noise_rms": 1e-4, "branches": [{"sections": [
                                             {"integers": [22719, 22719, 0, -21408, 0],
                                              "num_frac_bits": 17, "a1_frac_bits": 15,
                                              "a2_frac_bits": 15, "accepted": True,
                                              "pole_before": {"freq_hz": 1354.9, "damping": 1.0},
                                              "pole_after": {"freq_hz": 1355.0,
                                                             "damping": 1.0}}]}]}]}}
    sizing = {"law": "dvf", "target_damping": 0.05, "modes": [2, 3], "rows": []}
    text = render_report(ReportInputs(check=inputs.check, design=inputs.design,
                                      assessment=dict(inputs.assessment, target_modes=[1]),
                                      export=export, sizing=sizing))
    assert "Fixed point (Q15)" in text
    assert '22719 22719 0 <span class="num">-21408</span> 0' in text
    assert "on target modes 2, 3" in text
    assert "Sizing and assessment used different target modes: sizing 2, 3, assessment 1" in text
