"""The "Save turning movie…" button of the peak depth and occlusion docks, under Xvfb.

Frame counts and sizes are read back with imageio (pillow for GIF, the
imageio-ffmpeg back end for MP4), which the package does not use to read.
"""

from __future__ import annotations

import imageio.v2 as iio2
import imageio.v3 as iio3
import numpy as np
import pytest

from tests.widgets.test_projection_widgets import WAIT_MS, _stack
from tests.widgets.test_projection_widgets import _add_stack as _add

pytestmark = pytest.mark.gui


def test_peak_dock_saves_a_gif_with_its_frames(make_napari_viewer, tmp_path):
    from viewer_plugin.widgets.projection import PeakDepthWidget

    viewer = make_napari_viewer(show=True)
    data = _stack()
    before = data.copy()
    layer = _add(viewer, data)
    widget = PeakDepthWidget(viewer)
    assert widget.movie_button.text == "Save turning movie\u2026"
    widget.movie_frames.value = 6
    saved = widget.save_movie(tmp_path / "peak.gif")
    frames = iio3.imread(tmp_path / "peak.gif", index=None)
    assert frames.shape[0] == 6 == saved.frames
    assert frames.shape[1:3] == saved.size
    assert saved.movie.options.clim == tuple(float(v) for v in layer.contrast_limits)
    np.testing.assert_array_equal(layer.data, before)


def test_occlusion_dock_saves_an_mp4_in_the_background(make_napari_viewer, qtbot, tmp_path):
    from viewer_plugin.widgets.projection import OcclusionWidget

    viewer = make_napari_viewer(show=True)
    _add(viewer, _stack())
    widget = OcclusionWidget(viewer)
    widget.movie_frames.value = 5
    widget.movie_turn.value = "x"
    worker = widget.save_movie(tmp_path / "occlusion.mp4", background=True)
    assert worker is not None
    qtbot.waitUntil(lambda: not widget.task.running, timeout=WAIT_MS)
    assert widget.saved_movie is not None
    reader = iio2.get_reader(tmp_path / "occlusion.mp4", format="FFMPEG")
    try:
        assert reader.count_frames() == 5
        width, height = reader.get_meta_data()["size"]
    finally:
        reader.close()
    assert (height, width) == widget.saved_movie.size
    assert widget.saved_movie.movie.options.turn == "x"
    assert "Saved" in widget.status.value


def test_a_series_layer_turns_at_the_time_point_shown(make_napari_viewer, tmp_path):
    from viewer_plugin.widgets.projection import PeakDepthWidget

    viewer = make_napari_viewer(show=True)
    series = np.stack([_stack(seed=1), _stack(seed=2), _stack(seed=3)])
    _add(viewer, series, scale=(30.0, 2.0, 0.5, 0.5), translate=(0.0,) * 4,
         axis_labels=("t", "z", "y", "x"), units=("s", "um", "um", "um"))
    viewer.dims.set_point(0, 60.0)  # time point 2
    widget = PeakDepthWidget(viewer)
    assert widget.axis_combo.value == 1
    widget.movie_frames.value = 2
    saved = widget.save_movie(tmp_path / "t2.gif")
    assert saved.movie.provenance["time_point"] == 2
    assert saved.movie.provenance["voxel_size_um"] == [2.0, 0.5, 0.5]


def test_existing_file_and_bad_name_are_refused_before_work(make_napari_viewer, tmp_path, errors):
    from viewer_plugin.widgets.projection import DepthColourWidget, OcclusionWidget

    viewer = make_napari_viewer(show=True)
    _add(viewer, _stack())
    widget = OcclusionWidget(viewer)
    target = tmp_path / "taken.gif"
    target.write_bytes(b"keep me")
    assert widget.save_movie(target) is None
    assert widget.save_movie(tmp_path / "movie.avi") is None
    assert target.read_bytes() == b"keep me"
    assert len(errors) == 2 and "exists" in errors[0] and ".mp4 or .gif" in errors[1]
    assert not widget.task.running
    assert not hasattr(DepthColourWidget(viewer), "movie_button")
