"""OME-TIFF / TIFF reading and writing: voxel sizes, channels, broken files, no overwrite."""

from __future__ import annotations

import logging
import time

import numpy as np
import pytest
import tifffile

from viewer_plugin.io import StackReadError, read_stack, write_ome_tiff
from viewer_plugin.io.reader import napari_get_reader
from viewer_plugin.io.writer import write_image_layer


@pytest.fixture
def zcyx():
    rng = np.random.default_rng(0)
    return rng.integers(0, 4000, size=(5, 2, 16, 20), dtype=np.uint16)


def test_round_trip_keeps_voxel_size_and_channel_names(tmp_path, zcyx):
    path = write_ome_tiff(tmp_path / "a.ome.tif", zcyx, axes="ZCYX", scale=(0.8, 1, 0.21, 0.21),
                          channel_names=["GFP", "tdTomato"], metadata={"truth": {"length": 50.0}})
    stack = read_stack(path)
    assert stack.axes == "ZCYX"
    assert stack.scale == pytest.approx((0.8, 1, 0.21, 0.21))
    assert stack.channel_names == ["GFP", "tdTomato"]
    assert stack.metadata["truth"] == {"length": 50.0}
    np.testing.assert_array_equal(stack.data, zcyx)


def test_ome_units_are_converted_to_micrometres(tmp_path):
    """OME-XML PhysicalSize with nm units (OME data model: PhysicalSizeXUnit) reads as um."""
    data = np.zeros((3, 8, 8), np.uint8)
    tifffile.imwrite(tmp_path / "nm.ome.tif", data, ome=True,
                     metadata={"axes": "ZYX", "PhysicalSizeX": 250, "PhysicalSizeXUnit": "nm",
                               "PhysicalSizeY": 250, "PhysicalSizeYUnit": "nm",
                               "PhysicalSizeZ": 2, "PhysicalSizeZUnit": "µm"})
    assert read_stack(tmp_path / "nm.ome.tif").scale == pytest.approx((2.0, 0.25, 0.25))


def test_time_increment_becomes_the_time_step(tmp_path):
    data = np.zeros((4, 3, 8, 8), np.uint16)
    path = write_ome_tiff(tmp_path / "t.ome.tif", data, axes="TZYX", scale=(30.0, 1.0, 0.3, 0.3))
    stack = read_stack(path)
    assert stack.axes == "TZYX" and stack.scale == pytest.approx((30.0, 1.0, 0.3, 0.3))
    assert stack.units == ("s", "µm", "µm", "µm")


def test_plain_tiff_with_resolution_tags(tmp_path):
    """Baseline TIFF XResolution/YResolution in pixels per centimetre (TIFF 6.0 spec)."""
    data = np.zeros((4, 8, 8), np.uint16)
    tifffile.imwrite(tmp_path / "r.tif", data, photometric="minisblack", resolution=(1e4 / 0.5, 1e4 / 0.5),
                     resolutionunit="CENTIMETER")
    assert read_stack(tmp_path / "r.tif").scale[1:] == pytest.approx((0.5, 0.5))


def test_plain_tiff_without_resolution_warns_and_uses_1(tmp_path, caplog):
    tifffile.imwrite(tmp_path / "p.tif", np.zeros((4, 8, 8), np.uint16), photometric="minisblack")
    with caplog.at_level(logging.WARNING):
        stack = read_stack(tmp_path / "p.tif")
    assert stack.scale == (1.0, 1.0, 1.0)
    assert "resolution" in caplog.text and "p.tif" in caplog.text


def test_odd_metadata_falls_back_with_a_warning(tmp_path, caplog):
    data = np.zeros((3, 8, 8), np.uint8)
    tifffile.imwrite(tmp_path / "odd.ome.tif", data, ome=True,
                     metadata={"axes": "ZYX", "PhysicalSizeX": -1.0, "PhysicalSizeY": 0.3})
    with caplog.at_level(logging.WARNING):
        stack = read_stack(tmp_path / "odd.ome.tif")
    assert stack.scale[2] == 1.0 and stack.scale[1] == pytest.approx(0.3)
    assert "PhysicalSizeX" in caplog.text


def test_truncated_tiff_raises_the_package_exception(tmp_path, zcyx):
    path = write_ome_tiff(tmp_path / "full.ome.tif", zcyx, axes="ZCYX", scale=(1, 1, 1, 1),
                          compression=None)
    broken = tmp_path / "broken.ome.tif"
    broken.write_bytes(path.read_bytes()[: path.stat().st_size // 2])
    with pytest.raises(StackReadError, match="broken.ome.tif: truncated") as info:
        read_stack(broken)
    assert isinstance(info.value, ValueError)


def test_not_a_tiff_and_missing_file(tmp_path):
    junk = tmp_path / "junk.tif"
    junk.write_bytes(b"this is not an image" * 20)
    with pytest.raises(StackReadError, match="junk.tif: cannot read as TIFF"):
        read_stack(junk)
    with pytest.raises(StackReadError, match="no such file"):
        read_stack(tmp_path / "missing.tif")


def test_writer_never_overwrites_without_permission(tmp_path, zcyx):
    path = write_ome_tiff(tmp_path / "a.ome.tif", zcyx, axes="ZCYX", scale=(1, 1, 1, 1))
    before = path.read_bytes()
    with pytest.raises(FileExistsError, match="a.ome.tif exists"):
        write_ome_tiff(path, zcyx[:1], axes="ZCYX", scale=(1, 1, 1, 1))
    assert path.read_bytes() == before
    assert [p.name for p in tmp_path.iterdir()] == ["a.ome.tif"]  # no temp file left behind


def test_lazy_read_gives_the_same_pixels(tmp_path, zcyx):
    path = write_ome_tiff(tmp_path / "a.ome.tif", zcyx, axes="ZCYX", scale=(1, 1, 1, 1))
    stack = read_stack(path, lazy=True)
    assert type(stack.data).__module__.startswith("dask")
    np.testing.assert_array_equal(stack.data.compute(), zcyx)


def test_dask_input_is_written_plane_by_plane(tmp_path, zcyx):
    da = pytest.importorskip("dask.array")
    path = write_ome_tiff(tmp_path / "d.ome.tif", da.from_array(zcyx, chunks=(2, 1, 16, 20)),
                          axes="ZCYX", scale=(1, 1, 1, 1))
    np.testing.assert_array_equal(read_stack(path).data, zcyx)


def test_napari_reader_splits_channels_and_keeps_scale(tmp_path, zcyx):
    path = write_ome_tiff(tmp_path / "a.ome.tif", zcyx, axes="ZCYX", scale=(0.8, 1, 0.21, 0.21),
                          channel_names=["GFP", "tdTomato"])
    reader = napari_get_reader(str(path))
    layers = reader(str(path))
    assert [kw["name"] for _, kw, _ in layers] == ["a [GFP]", "a [tdTomato]"]
    for data, kwargs, kind in layers:
        assert kind == "image" and data.shape == (5, 16, 20)
        assert kwargs["scale"] == pytest.approx((0.8, 0.21, 0.21))
        assert kwargs["axis_labels"] == ("z", "y", "x")


def test_reader_declines_other_files_quickly():
    start = time.perf_counter()
    assert napari_get_reader("image.png") is None
    assert napari_get_reader(["a.tif", "b.czi"]) is None
    assert time.perf_counter() - start < 0.5


def test_writer_hook_saves_layer_scale(tmp_path):
    data = np.arange(3 * 4 * 5, dtype=np.uint16).reshape(3, 4, 5)
    [written] = write_image_layer(str(tmp_path / "layer.ome.tif"), data,
                                  {"scale": (2.0, 0.5, 0.5), "axis_labels": ("z", "y", "x")})
    stack = read_stack(written)
    assert stack.scale == pytest.approx((2.0, 0.5, 0.5))
    np.testing.assert_array_equal(stack.data, data)


@pytest.mark.realdata
def test_real_open_stacks_voxel_sizes(realdata):
    """Voxel sizes as listed in ../shared/realdata/README.md (NEUBIAS, brainglobe open data)."""
    nucleus = read_stack(realdata / "nucleus_confocal_widefield.ome.tif")
    assert nucleus.axes == "ZCYX" and nucleus.data.shape == (45, 2, 130, 133)
    assert nucleus.scale[0] == pytest.approx(0.4994) and nucleus.scale[2] == pytest.approx(0.5119)
    golgi = read_stack(realdata / "golgi_airyscan.ome.tif")
    assert golgi.scale == pytest.approx((0.3876, 0.3514, 0.3514))
    cortex = read_stack(realdata / "cortex_cells_serial_twophoton.ome.tif")
    assert cortex.scale == pytest.approx((5.0, 2.0, 2.0))


def test_written_files_get_normal_permissions(tmp_path):
    """A result is readable like any other file the user makes (0o666 less the umask), not 0o600."""
    import os

    from viewer_plugin._shared.atomic import _UMASK

    path = write_ome_tiff(tmp_path / "p.ome.tif", np.zeros((2, 4, 4), np.uint8), axes="ZYX",
                          scale=(1, 1, 1))
    assert os.stat(path).st_mode & 0o777 == 0o666 & ~_UMASK
