"""``stackdepth movie``: MP4 and GIF written and read back, time series, refusals before work.

Movies are read back with imageio (pillow for GIF, the imageio-ffmpeg back end for MP4).
Reference values: frame 0 of a peak movie is ``numpy.max`` along z (the cubic grid meets every
slice at angle 0 and linear interpolation never exceeds its ends); the shared display limits of a
series are the 0.1 and 99.9 percentiles of the whole series (numpy.percentile on a strided sample).
"""

from __future__ import annotations

import imageio.v2 as iio2
import imageio.v3 as iio3
import numpy as np
import pytest

from tests.cli._console import assert_one_line_error, run_cli
from tests.cli.test_project import _bars
from viewer_plugin._shared.stack import Stack
from viewer_plugin.cli import main
from viewer_plugin.io import write_ome_tiff
from viewer_plugin.kernels import display_limits


@pytest.fixture
def stack_file(tmp_path):
    data = _bars()
    return write_ome_tiff(tmp_path / "bars.ome.tif", data, axes="ZYX", scale=(1.5, 0.5, 0.5)), data


def test_command_line_offers_the_job_choices():
    """argparse reads the movie choices from jobs.choices, which takes them from the kernel."""
    from viewer_plugin.cli import build_parser
    from viewer_plugin.jobs import choices
    from viewer_plugin.kernels import projection

    sub = next(a for a in build_parser()._actions if a.__class__.__name__ == "_SubParsersAction")
    actions = {a.dest: a for a in sub.choices["movie"]._actions}
    assert tuple(actions["method"].choices) == choices.MOVIE_METHODS == projection.TURN_METHODS
    assert tuple(actions["turn"].choices) == choices.TURN_AXES == tuple(choices.TURN_LABELS)
    assert set(choices.MOVIE_METHOD_LABELS) == set(choices.MOVIE_METHODS)
    assert tuple(actions["over"].choices) == choices.MOVIE_OVER == tuple(choices.DEFAULT_MOVIE_METHOD)


def _mp4_frames(path):
    """(frame count, (height, width), frames per second) of an MP4."""
    reader = iio2.get_reader(path, format="FFMPEG")
    try:
        meta = reader.get_meta_data()
        return reader.count_frames(), meta["size"][::-1], meta["fps"]
    finally:
        reader.close()


def test_gif_and_mp4_have_their_frames_and_size(stack_file, tmp_path, capsys):
    path, _ = stack_file
    gif, mp4 = tmp_path / "turn.gif", tmp_path / "turn.mp4"
    assert main(["movie", str(path), "-o", str(gif), "--frames", "8", "--method", "peak"]) == 0
    assert main(["movie", str(path), "-o", str(mp4), "--frames", "6", "--fps", "10"]) == 0
    out = capsys.readouterr().out
    assert "8 frames" in out and "6 frames" in out
    frames = iio3.imread(gif, index=None)
    assert frames.shape[0] == 8 and frames.shape[-1] == 3
    count, size, fps = _mp4_frames(mp4)
    assert count == 6 and fps == pytest.approx(10)
    assert size[0] % 16 == 0 and size[1] % 16 == 0  # padded to the codec's block
    assert size == frames.shape[1:3]
    assert sorted(p.name for p in tmp_path.iterdir()) == ["bars.ome.tif", "turn.gif", "turn.mp4"]


def test_frame_0_of_the_job_is_the_maximum_projection(stack_file):
    """The raw frame 0 (before overlays) of the job is numpy.max along z, embedded in the canvas."""
    from viewer_plugin.io import read_stack
    from viewer_plugin.jobs import MovieOptions, make_movie, select

    path, data = stack_file
    movie = make_movie(select(read_stack(path)), MovieOptions(method="peak", frames=4))
    lo, hi = movie.views.clim
    frame = movie.views.render(0)
    assert movie.pixel_um == (0.5, 0.5)
    left = int((frame.shape[1] - 1) / 2 - movie.views.volume.pivot[1])
    grey = np.clip((data.max(axis=0).astype(np.float32) - np.float32(lo)) / np.float32(hi - lo), 0, 1)
    np.testing.assert_array_equal(frame[:, left:left + 40, 0], grey)
    assert not frame[:, :left].any() and not frame[:, left + 40:].any()


def test_over_t_writes_one_frame_per_time_point_with_shared_ranges(tmp_path):
    from viewer_plugin.jobs import MovieOptions, save_movie, select

    series = np.stack([_bars(seed=s) // (1 + s) + 100 for s in range(5)]).astype(np.uint16)
    path = write_ome_tiff(tmp_path / "series.ome.tif", series, axes="TZYX",
                          scale=(30.0, 2.0, 0.5, 0.5))
    result = run_cli("movie", path, "-o", tmp_path / "series.gif", "--over", "t")
    assert result.returncode == 0, result.stderr
    assert iio3.imread(tmp_path / "series.gif", index=None).shape[0] == 5
    stack = Stack(series, "TZYX", (30.0, 2.0, 0.5, 0.5), name="series")
    saved = save_movie(select(stack), MovieOptions(over="t"), tmp_path / "job.mp4")
    record = saved.movie.provenance
    assert saved.frames == 5 and record["method"] == "depth-colour"
    assert record["clim_used"] == pytest.approx(display_limits(series, axis=1))
    assert record["depth_range_um"] == [0.0, 18.0]  # (10 - 1) slices x 2 um, for every frame
    assert _mp4_frames(tmp_path / "job.mp4")[0] == 5


@pytest.mark.parametrize("options, fragment", [
    (["--frames", "1"], "--frames: expected an integer >= 2"),
    (["--fps", "0"], "--fps"),
    (["--over", "t", "--turn", "x"], "--turn"),
])
def test_bad_options_are_refused_before_reading(tmp_path, options, fragment):
    """The input does not even exist: the options are refused first (exit 2, one line)."""
    result = run_cli("movie", tmp_path / "missing.ome.tif", "-o", tmp_path / "m.gif", *options)
    assert_one_line_error(result, fragment)


@pytest.mark.parametrize("name", ["movie.avi", "movie", "movie.ome.tif"])
def test_an_output_without_a_movie_suffix_is_refused(tmp_path, name):
    result = run_cli("movie", tmp_path / "missing.ome.tif", "-o", tmp_path / name)
    assert_one_line_error(result, "--output: expected a movie file name ending in .mp4 or .gif")
    assert list(tmp_path.iterdir()) == []


def test_an_existing_output_needs_overwrite(stack_file, tmp_path):
    path, _ = stack_file
    target = tmp_path / "taken.gif"
    target.write_bytes(b"keep me")
    assert_one_line_error(run_cli("movie", path, "-o", target, "--frames", "2"), "--overwrite")
    assert target.read_bytes() == b"keep me"
    result = run_cli("movie", path, "-o", target, "--frames", "2", "--overwrite")
    assert result.returncode == 0, result.stderr
    assert iio3.imread(target, index=None).shape[0] == 2


def test_a_cancelled_movie_leaves_no_file(stack_file, tmp_path):
    from viewer_plugin.io import read_stack
    from viewer_plugin.jobs import MovieOptions, save_movie, select
    from viewer_plugin.kernels import Cancelled

    path, _ = stack_file

    def stop(done, total):
        if done >= 3:
            raise Cancelled

    with pytest.raises(Cancelled):
        save_movie(select(read_stack(path)), MovieOptions(frames=6), tmp_path / "x.mp4",
                   progress=stop)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["bars.ome.tif"]
