"""``stackdepth bleaching``: exit 0 within tolerance, 4 inconclusive, 3 above it, 2 for bad input.

Reference values: the demo's recorded truth (per-frame rate 1 - (1 - k)**N; first-order
kinetics, from memory) and, for the corrected file, a re-check that finds it flat.
"""

from __future__ import annotations

import json
import subprocess
import sys

import numpy as np
import pytest

from viewer_plugin import demo
from viewer_plugin.cli import main
from viewer_plugin.io import read_stack, write_ome_tiff


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    folder = tmp_path_factory.mktemp("bleach")
    series = demo.bleach_series(n_time=12, shape=(6, 64, 64), n_fibres=4, bleach_rate_per_exposure=0.004)
    forward, reverse = demo.two_pass_pair()
    flat = demo.bleach_series(seed=5, n_time=8, shape=(6, 64, 64), n_fibres=4,
                              bleach_rate_per_exposure=0.0)
    out = {}
    for key, stack in {"series": series, "forward": forward, "reverse": reverse, "flat": flat}.items():
        out[key] = write_ome_tiff(folder / f"{key}.ome.tif", stack.data, axes=stack.axes,
                                  scale=stack.scale, metadata={"truth": stack.truth})
    out["truth"] = series.truth
    out["pair_truth"] = forward.truth
    two = np.stack([series.data[:, 0], series.data[:, 1]], axis=1)    # T C Y X
    out["channels"] = write_ome_tiff(folder / "channels.ome.tif", two, axes="TCYX",
                                     scale=(30.0, 1.0, 0.3, 0.3))
    return out


def one_line_error(capsys, *fragments):
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("stackdepth: error:"), err
    for fragment in fragments:
        assert fragment in err[0]


def test_bleaching_series_over_tolerance_exits_3_and_writes_outputs(files, tmp_path, capsys):
    report, plot, corrected = tmp_path / "r.json", tmp_path / "p.png", tmp_path / "c.ome.tif"
    status = main(["bleaching", str(files["series"]), "--report", str(report), "--plot", str(plot),
                   "-o", str(corrected)])
    out = capsys.readouterr().out
    assert status == 3
    assert out.splitlines()[0].startswith("Signal fell by") and "exceeds" in out
    data = json.loads(report.read_text())
    for key in ("rate_per_frame", "rate_interval", "half_life", "fraction_lost", "exceeds_tolerance",
                "tolerance", "r_squared", "profile", "model_profile", "offset", "summary", "model",
                "axis_kind", "caveat", "input", "parameters", "stackdepth_version", "caution"):
        assert key in data, key
    assert data["axis_kind"] == "time" and data["parameters"]["interval"] == 30.0
    assert data["rate_per_frame"] == pytest.approx(files["truth"]["bleach_rate_per_frame"], rel=0.1)
    assert plot.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    written = read_stack(corrected)
    assert written.axes == "TZYX" and written.data.dtype == np.float32
    assert written.scale == pytest.approx((30.0, 1.0, 0.3, 0.3))
    # the corrected file no longer fades: a re-check is within tolerance (exit 0)
    assert main(["bleaching", str(corrected)]) == 0


def test_within_tolerance_exits_0(files, capsys):
    assert main(["bleaching", str(files["series"]), "--tolerance", "60%"]) == 0
    assert "within the 60 % tolerance" in capsys.readouterr().out
    assert main(["bleaching", str(files["flat"])]) == 0
    assert "No significant fading" in capsys.readouterr().out


def test_single_stack_says_it_cannot_separate(files, capsys):
    main(["bleaching", str(files["forward"])])
    out = capsys.readouterr().out
    assert "cannot tell bleaching from depth attenuation" in out
    assert "caveat:" in out and "--reverse" in out


def test_two_pass_reports_rate_and_length(files, tmp_path, capsys):
    report = tmp_path / "two.json"
    status = main(["bleaching", str(files["forward"]), "--reverse", str(files["reverse"]),
                   "--report", str(report)])
    out = capsys.readouterr().out
    assert status == 3         # the forward pass lost ~18 % > 10 %
    assert "per slice exposure" in out and "attenuation length" in out
    data = json.loads(report.read_text())
    low, high = data["rate_interval"]
    assert low <= files["pair_truth"]["bleach_rate_per_exposure"] <= high
    assert data["exceeds_tolerance"] is True and data["demo_truth"]
    assert main(["bleaching", str(files["forward"]), "--reverse", str(files["reverse"]),
                 "--tolerance", "0.5"]) == 0


def test_channels_are_selected(files, capsys):
    assert main(["bleaching", str(files["channels"]), "--channel", "1"]) in (0, 3)
    assert capsys.readouterr().out.startswith("Signal fell")
    assert main(["bleaching", str(files["channels"])]) in (0, 3)
    assert "checking channel 0" in capsys.readouterr().err
    assert main(["bleaching", str(files["channels"]), "--channel", "5"]) == 2
    one_line_error(capsys, "--channel")


@pytest.mark.parametrize(
    "extra, fragment",
    [
        (["--tolerance", "2"], "--tolerance"),
        (["--tolerance", "ten"], "--tolerance"),
        (["--interval", "0"], "--interval"),
        (["--reverse", "missing.ome.tif"], "missing.ome.tif"),
    ],
)
def test_bad_options_exit_2_with_one_line(files, capsys, extra, fragment):
    assert main(["bleaching", str(files["series"]), *extra]) == 2
    one_line_error(capsys, fragment)


def test_bad_input_exits_2(files, tmp_path, capsys):
    assert main(["bleaching", str(tmp_path / "nothing.tif")]) == 2
    one_line_error(capsys, "no such file")
    assert main(["bleaching", str(files["forward"]), "--axis", "t"]) == 2
    one_line_error(capsys, "--axis t")
    noise = np.random.default_rng(0).poisson(100, size=(5, 4, 32, 32)).astype(np.uint16)
    path = write_ome_tiff(tmp_path / "noise.ome.tif", noise, axes="TZYX", scale=(1, 1, 1, 1))
    assert main(["bleaching", str(path)]) == 2
    one_line_error(capsys, "background")


def test_no_overwrite_without_the_option(files, tmp_path, capsys):
    target = tmp_path / "r.json"
    target.write_text("keep")
    assert main(["bleaching", str(files["series"]), "--report", str(target)]) == 2
    one_line_error(capsys, "--overwrite")
    assert target.read_text() == "keep"
    assert main(["bleaching", str(files["series"]), "--report", str(target), "--overwrite"]) == 3
    assert json.loads(target.read_text())["command"] == "bleaching"


def test_console_script_exit_status_and_no_traceback(files):
    """The real entry point in a fresh interpreter: exit 3, summary on stdout."""
    result = subprocess.run([sys.executable, "-m", "viewer_plugin.cli", "bleaching",
                             str(files["series"])], capture_output=True, text=True, timeout=300)
    assert result.returncode == 3 and result.stdout.startswith("Signal fell")
    assert "Traceback" not in result.stderr


@pytest.mark.parametrize("rescale", ["model", "measured"])
def test_rescale_choices_flatten_the_series(files, tmp_path, capsys, rescale):
    """--rescale model|measured: the corrected file re-checks flat (first-order kinetics)."""
    corrected = tmp_path / f"{rescale}.ome.tif"
    assert main(["bleaching", str(files["series"]), "-o", str(corrected), "--rescale", rescale]) == 3
    written = read_stack(corrected)
    assert written.metadata["bleaching_correction"]["rescale"] == rescale
    assert main(["bleaching", str(corrected), "--tolerance", "0.05"]) == 0
    capsys.readouterr()


def test_equalise_writes_a_histogram_matched_copy(files, tmp_path, capsys):
    """--equalise OUT: every time point's histogram matched to time point 0
    (reference library: skimage.exposure.match_histograms)."""
    from skimage.exposure import match_histograms

    out = tmp_path / "eq.ome.tif"
    assert main(["bleaching", str(files["series"]), "--equalise", str(out)]) == 3
    assert "not for intensities" in capsys.readouterr().out
    source, written = read_stack(files["series"]).data, read_stack(out).data
    assert written.dtype == np.float32 and written.shape == source.shape
    np.testing.assert_allclose(written[5], match_histograms(source[5], source[0]), rtol=1e-5,
                               atol=1e-3)
    assert main(["bleaching", str(files["series"]), "--equalise", str(tmp_path / "eq.tif")]) == 2
    one_line_error(capsys, "--equalise", ".ome.tif")


# ------------------------------------------------------------------ exit status per verdict
# The verdict comes from the 95 % interval of the loss (docs/bleaching.md): 0 within, 4
# inconclusive, 3 exceeds. Series with a known first-order loss (first-order kinetics, from
# memory), written to OME-TIFF and checked through viewer_plugin.cli.main.


@pytest.mark.parametrize("lost, photons, status, words", [
    (0.09, 15.0, 4, "inconclusive against the 10 % tolerance"),
    (0.02, 300.0, 0, "within the 10 % tolerance (95 % interval of the loss:"),
    (0.30, 300.0, 3, "exceeds the 10 % tolerance (95 % interval of the loss:"),
])
def test_exit_status_follows_the_verdict(tmp_path, capsys, lost, photons, status, words):
    from tests.kernels.test_bleaching_coverage import loss_series

    data = loss_series(1, lost=lost, n=8, photons=photons)
    path = write_ome_tiff(tmp_path / "series.ome.tif", data, axes="TZYX", scale=(10.0, 1, 1, 1))
    report = tmp_path / "r.json"
    assert main(["bleaching", str(path), "--report", str(report)]) == status
    assert words in capsys.readouterr().out
    verdict = {0: "within", 3: "exceeds", 4: "inconclusive"}[status]
    data = json.loads(report.read_text())
    assert data["verdict"] == verdict and data["exceeds_tolerance"] == (status == 3)
    assert "interval" in data["parameters"]["verdict_rule"]


def test_help_documents_exit_status_4(capsys):
    with pytest.raises(SystemExit):
        main(["bleaching", "--help"])
    text = " ".join(capsys.readouterr().out.split())
    assert "4 inconclusive" in text and "3 above it" in text and "0 within tolerance" in text
    with pytest.raises(SystemExit):
        main(["--help"])
    assert "4 inconclusive" in " ".join(capsys.readouterr().out.split())
