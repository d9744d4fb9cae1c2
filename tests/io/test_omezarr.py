"""OME-Zarr (NGFF 0.4 / 0.5): round trips, pyramids, streaming writes, conversion, errors.

Outside references used here:
- the OME-NGFF specification 0.4 / 0.5 ("multiscales": per-dataset coordinateTransformations,
  a scale per level; axes with UDUNITS-2 unit names), https://ngff.openmicroscopy.org;
- ngff-zarr's reader (``ngff_zarr.from_ngff_zarr``) and ome-zarr's reader
  (``ome_zarr.reader.Reader``) reading what we wrote; ome-zarr's writer writing what we read;
- scikit-image's ``skimage.transform.downscale_local_mean`` for the 2x block mean;
- tifffile's own ``imread`` for the pixels of a converted TIFF.
"""

from __future__ import annotations

import json
import logging
import tracemalloc
import warnings

import numpy as np
import pytest
import tifffile

from viewer_plugin._shared.progress import Cancelled
from viewer_plugin._shared.validation import ParameterError
from viewer_plugin.io import (
    StackReadError,
    _zarrstore,
    convert_to_ome_zarr,
    omezarr_write,
    read_ome_zarr,
    read_ome_zarr_levels,
    read_stack,
    write_ome_tiff,
    write_ome_zarr,
)

VERSIONS = ["0.4", "0.5"]


@pytest.fixture
def czyx():
    return np.random.default_rng(1).integers(0, 4000, size=(2, 12, 40, 36), dtype=np.uint16)


def _chunk_file(folder, level, coords, version):
    """Chunk file of a level: "0/1/0/2" in Zarr format 2 with "/", "0/c/1/0/2" in format 3."""
    parts = [str(level)] + (["c"] if version == "0.5" else []) + [str(c) for c in coords]
    return folder.joinpath(*parts)


def _ome_zarr_writer():
    with warnings.catch_warnings():  # ome_zarr.writer deprecates a class at import time
        warnings.simplefilter("ignore", DeprecationWarning)
        from ome_zarr import writer
    return writer


# --------------------------------------------------------------------------- round trips


@pytest.mark.parametrize("version", VERSIONS)
def test_round_trip_keeps_axes_scale_channels_and_metadata(tmp_path, czyx, version):
    zcyx = np.moveaxis(czyx, 0, 1)  # written in TIFF order; stored and read back in NGFF order
    path = write_ome_zarr(tmp_path / "a.ome.zarr", zcyx, axes="ZCYX", scale=(2.0, 1, 0.3, 0.3),
                          channel_names=["GFP", "tdTomato"], chunks=(4, 16, 16), version=version,
                          metadata={"truth": {"length_um": 50.0, "seed": np.int64(3)}},
                          translate=(-4.0, 0, 1.5, 2.5))
    stack = read_ome_zarr(path)
    assert type(stack.data).__module__.startswith("dask")
    assert stack.axes == "CZYX"
    assert stack.scale == pytest.approx((1.0, 2.0, 0.3, 0.3))
    assert stack.translate == pytest.approx((0.0, -4.0, 1.5, 2.5))
    assert stack.units == ("", "µm", "µm", "µm")
    assert stack.channel_names == ["GFP", "tdTomato"]
    assert stack.metadata["truth"] == {"length_um": 50.0, "seed": 3}
    info = stack.metadata["ome_zarr"]
    assert info["version"] == version and info["chunks"] == (1, 4, 16, 16)
    assert info["levels"] == len(info["shapes"]) == 2
    np.testing.assert_array_equal(stack.data.compute(), czyx)


@pytest.mark.parametrize("version", VERSIONS)
def test_what_we_write_reads_the_same_in_ngff_zarr_and_ome_zarr(tmp_path, czyx, version):
    """Outside references: ngff-zarr's and ome-zarr's own readers see our scale, units, labels, pixels."""
    ngff_zarr = pytest.importorskip("ngff_zarr")
    from ome_zarr.io import parse_url
    from ome_zarr.reader import Reader

    path = write_ome_zarr(tmp_path / "a.ome.zarr", czyx, axes="CZYX", scale=(1, 2.0, 0.3, 0.3),
                          channel_names=["GFP", "tdTomato"], chunks=(4, 16, 16), version=version)
    multiscales = ngff_zarr.from_ngff_zarr(str(path))
    assert multiscales.images[0].scale == pytest.approx({"c": 1.0, "z": 2.0, "y": 0.3, "x": 0.3})
    assert multiscales.images[0].axes_units == {"c": None, "z": "micrometer", "y": "micrometer",
                                                "x": "micrometer"}
    assert [c.label for c in multiscales.metadata.omero.channels] == ["GFP", "tdTomato"]
    np.testing.assert_array_equal(multiscales.images[0].data.compute(), czyx)
    node = next(iter(Reader(parse_url(str(path)))()))
    assert node.metadata["channel_names"] == ["GFP", "tdTomato"]
    assert [a["name"] for a in node.metadata["axes"]] == ["c", "z", "y", "x"]
    np.testing.assert_array_equal(node.data[0].compute(), czyx)


def test_reads_what_ome_zarr_writes_with_other_units(tmp_path):
    """ome-zarr's writer (outside reference) with nanometre/millimetre/millisecond units: steps in µm and s."""
    import zarr

    writer = _ome_zarr_writer()
    from ome_zarr.format import FormatV05

    data = np.arange(3 * 4 * 8 * 8, dtype=np.uint8).reshape(3, 4, 8, 8)
    group = zarr.open_group(str(tmp_path / "u.ome.zarr"), mode="w", zarr_format=3)
    writer.write_multiscale([data], group, fmt=FormatV05(), axes="tzyx",
                            scale={"t": 250.0, "z": 0.002, "y": 400.0, "x": 400.0},
                            axes_units={"t": "millisecond", "z": "millimeter", "y": "nanometer",
                                        "x": "nanometer"},
                            storage_options={"chunks": (1, 4, 8, 8)})
    stack = read_stack(tmp_path / "u.ome.zarr")
    assert stack.axes == "TZYX"
    assert stack.scale == pytest.approx((0.25, 2.0, 0.4, 0.4))
    np.testing.assert_array_equal(stack.data, data)


def _edit_multiscales(path, edit):
    import zarr

    group = zarr.open_group(str(path), mode="r+")
    multiscales = group.attrs["multiscales"]
    edit(multiscales[0])
    group.attrs["multiscales"] = multiscales


def test_missing_unit_and_bad_scale_warn_and_fall_back(tmp_path, caplog):
    path = write_ome_zarr(tmp_path / "odd.ome.zarr", np.zeros((4, 8, 8), np.uint8), axes="ZYX",
                          scale=(2.0, 0.5, 0.5), levels=1)

    def edit(entry):
        del entry["axes"][0]["unit"]
        entry["datasets"][0]["coordinateTransformations"][0]["scale"][2] = -0.5

    _edit_multiscales(path, edit)
    with caplog.at_level(logging.WARNING):
        stack = read_ome_zarr(path)
    assert stack.scale == pytest.approx((2.0, 0.5, 1.0))  # z kept (taken as µm), x falls back to 1
    assert "axis 'z' has no unit" in caplog.text
    assert "-0.5" in caplog.text and "axis 'x'" in caplog.text
    assert stack.metadata["unusable_voxel_size"] == {"X": -0.5}  # a job then refuses x steps of 1


def test_multiscales_wide_transform_and_translation_are_applied(tmp_path):
    """NGFF 0.4: a multiscales-level scale/translation applies after each dataset's."""
    path = write_ome_zarr(tmp_path / "t.ome.zarr", np.zeros((4, 8, 8), np.uint8), axes="ZYX",
                          scale=(1.0, 0.5, 0.5), levels=1)

    def edit(entry):
        entry["coordinateTransformations"] = [{"type": "scale", "scale": [2.0, 1.0, 1.0]},
                                              {"type": "translation", "translation": [5.0, 0, 0]}]

    _edit_multiscales(path, edit)
    stack = read_ome_zarr(path)
    assert stack.scale == pytest.approx((2.0, 0.5, 0.5))
    assert stack.translate == pytest.approx((5.0, 0.0, 0.0))


# --------------------------------------------------------------------------- pyramid


@pytest.mark.parametrize("version", VERSIONS)
def test_pyramid_shapes_scales_and_values(tmp_path, version):
    """NGFF spec: one scale per dataset, level steps = level-0 step x factor; values = block means."""
    from skimage.transform import downscale_local_mean

    data = np.random.default_rng(2).integers(0, 60000, size=(24, 128, 96), dtype=np.uint16)
    path = write_ome_zarr(tmp_path / "p.ome.zarr", data, axes="ZYX", scale=(0.5, 0.5, 0.5),
                          chunks=(8, 16, 16), version=version)
    levels = read_ome_zarr_levels(path)
    # isotropic voxels and z spanning several chunks: z is halved with y and x; the next level
    # would have a side under 16 pixels, so the pyramid stops
    assert [s.data.shape for s in levels] == [(24, 128, 96), (12, 64, 48), (6, 32, 24)]
    for k, stack in enumerate(levels):
        assert stack.scale == pytest.approx((0.5 * 2**k,) * 3)
        # pixel centres: a 2^k block's centre is (2^k - 1) / 2 level-0 steps from the first pixel's
        assert stack.translate == pytest.approx(((2**k - 1) / 2 * 0.5,) * 3)
    expected = np.rint(downscale_local_mean(data.astype(np.float64), (2, 2, 2))).astype(np.uint16)
    np.testing.assert_array_equal(levels[1].data.compute(), expected)


def test_anisotropic_z_waits_until_y_and_x_catch_up(tmp_path):
    data = np.zeros((12, 128, 128), np.uint8)
    path = write_ome_zarr(tmp_path / "a.ome.zarr", data, axes="ZYX", scale=(2.0, 0.5, 0.5),
                          chunks=(4, 32, 32), levels=5)
    levels = read_ome_zarr_levels(path)
    assert [s.data.shape[0] for s in levels] == [12, 12, 12, 6, 3]
    assert [s.scale[0] for s in levels] == [2.0, 2.0, 2.0, 4.0, 8.0]
    assert [s.scale[2] for s in levels] == [0.5, 1.0, 2.0, 4.0, 8.0]


def test_odd_sizes_and_too_many_levels(tmp_path):
    data = np.arange(5 * 7, dtype=np.uint8).reshape(5, 7)
    path = write_ome_zarr(tmp_path / "o.ome.zarr", data, axes="YX", scale=(1, 1), levels=2)
    coarse = read_ome_zarr(path, level=1).data.compute()
    assert coarse.shape == (3, 4)
    assert coarse[2, 3] == data[4, 6]  # the last pixel is the mean of what is there
    with pytest.raises(ParameterError, match="levels: expected at most 4 levels"):
        write_ome_zarr(tmp_path / "x.ome.zarr", data, axes="YX", scale=(1, 1), levels=9)
    with pytest.raises(ParameterError, match="level: expected an integer from 0 to 1"):
        read_ome_zarr(path, level=2)


# --------------------------------------------------------------------------- streaming


def _pattern(region):
    """uint8 values that differ between neighbours, made without large temporaries."""
    axes = [(np.arange(r.start, r.stop) * 7**i % 256).astype(np.uint8) for i, r in enumerate(region)]
    out = axes[0].reshape(-1, *([1] * (len(axes) - 1)))
    for i, a in enumerate(axes[1:], 1):
        out = out + a.reshape([-1 if j == i else 1 for j in range(len(axes))])
    return out


def _guarded(shape, chunks, log):
    """A dask array that records every block it computes and refuses blocks larger than a chunk."""
    da = pytest.importorskip("dask.array")
    limit = int(np.prod(chunks))

    def make(block_info=None):
        info = block_info[None]
        size = int(np.prod(info["chunk-shape"]))
        if size > limit:
            raise AssertionError(f"block of {size} pixels requested")
        log.append(info["chunk-location"])
        return _pattern([slice(lo, hi) for lo, hi in info["array-location"]])

    return da.map_blocks(make, dtype=np.uint8, chunks=tuple(
        tuple(min(c, n - i) for i in range(0, n, c)) for n, c in zip(shape, chunks)))


def _warm_up(tmp_path):
    """Small writes first (numpy and dask), so that lazy imports are not counted by tracemalloc."""
    write_ome_zarr(tmp_path / "warm.ome.zarr", np.zeros((2, 4, 4), np.uint8), axes="CYX",
                   scale=(1, 1, 1))
    write_ome_zarr(tmp_path / "warm_dask.ome.zarr", _guarded((8, 16, 16), (4, 8, 8), []),
                   axes="ZYX", scale=(1, 1, 1))


def test_dask_input_is_written_batch_by_batch(tmp_path, monkeypatch):
    """No block larger than a chunk is computed, and memory stays near one batch (tracemalloc)."""
    shape, chunks = (128, 256, 256), (8, 64, 64)  # 8 MiB of uint8 in 256 chunks of 32 KiB
    monkeypatch.setattr(omezarr_write, "BATCH_BYTES", 4 * int(np.prod(chunks)))
    log: list = []
    data = _guarded(shape, chunks, log)
    _warm_up(tmp_path)
    tracemalloc.start()
    try:
        path = write_ome_zarr(tmp_path / "s.ome.zarr", data, axes="ZYX", scale=(1, 1, 1),
                              chunks=chunks, levels=2)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert sorted(log) == sorted(np.ndindex(16, 4, 4))  # every block computed exactly once
    assert peak < 8 * 2**20 / 4, f"peak {peak / 2**20:.1f} MiB for an 8 MiB stack"
    np.testing.assert_array_equal(read_ome_zarr(path).data.compute(), _pattern(
        [slice(0, n) for n in shape]))


def test_progress_counts_chunks_and_cancel_leaves_nothing(tmp_path, czyx):
    seen = []
    write_ome_zarr(tmp_path / "p.ome.zarr", czyx, axes="CZYX", scale=(1, 1, 1, 1),
                   chunks=(4, 16, 16), progress=lambda d, t: seen.append((d, t)))
    total = seen[-1][1]
    assert seen[0] == (0, total) and seen[-1] == (total, total)
    assert total == 2 * 3 * 3 * 3 + 2 * 2 * 2 * 2  # level 0: 2x3x3x3 chunks, level 1: 2x2x2x2
    assert [d for d, _ in seen] == sorted(d for d, _ in seen)

    def cancel(done, total):
        if done > total // 2:
            raise Cancelled

    with pytest.raises(Cancelled):
        write_ome_zarr(tmp_path / "c.ome.zarr", czyx, axes="CZYX", scale=(1, 1, 1, 1),
                       chunks=(4, 16, 16), progress=cancel)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["p.ome.zarr"]


def test_never_overwrites_without_permission_and_replaces_safely(tmp_path, czyx):
    path = write_ome_zarr(tmp_path / "a.ome.zarr", czyx, axes="CZYX", scale=(1, 1, 1, 1))
    with pytest.raises(FileExistsError, match="a.ome.zarr exists"):
        write_ome_zarr(path, czyx[:1], axes="CZYX", scale=(1, 1, 1, 1))
    assert read_ome_zarr(path).data.shape == czyx.shape

    def cancel(done, total):
        if done:
            raise Cancelled

    with pytest.raises(Cancelled):  # a cancelled overwrite keeps the old folder
        write_ome_zarr(path, czyx[:1], axes="CZYX", scale=(1, 1, 1, 1), overwrite=True,
                       progress=cancel)
    assert read_ome_zarr(path).data.shape == czyx.shape
    # overwrite from a lazy read of the same folder: read fully before the swap
    write_ome_zarr(path, read_ome_zarr(path).data[:1], axes="CZYX", scale=(1, 1, 1, 1),
                   overwrite=True)
    np.testing.assert_array_equal(read_ome_zarr(path).data.compute(), czyx[:1])
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.ome.zarr"]


def test_bad_parameters_name_the_parameter(tmp_path, czyx):
    target = tmp_path / "x.ome.zarr"
    cases = [({"axes": "CZY"}, "axes: expected 4 distinct letters"),
             ({"scale": (1, 1, 1)}, "scale: expected 4 steps"),
             ({"scale": (1, 0, 1, 1)}, r"scale\[1\]: expected a number in \(0"),
             ({"version": "0.6"}, "version: expected one of '0.4', '0.5'"),
             ({"channel_names": ["only one"]}, "channel_names: expected 2 names"),
             ({"chunks": (4, 16)}, "chunks: expected 3 sizes"),
             ({"levels": 0}, "levels: expected an integer >= 1")]
    for change, message in cases:
        kwargs = {"axes": "CZYX", "scale": (1, 1, 1, 1), **change}
        with pytest.raises(ParameterError, match=message):
            write_ome_zarr(target, czyx, **kwargs)
    assert not target.exists()


# --------------------------------------------------------------------------- conversion


@pytest.mark.parametrize("compression", ["zlib", None])
def test_convert_keeps_pixels_scale_channels_and_metadata(tmp_path, czyx, compression):
    """Pixels equal tifffile.imread's (outside reference); compressed -> tifffile's Zarr store,
    uncompressed -> a memory map."""
    zcyx = np.ascontiguousarray(np.moveaxis(czyx, 0, 1))
    tif = write_ome_tiff(tmp_path / "s.ome.tif", zcyx, axes="ZCYX", scale=(2.0, 1, 0.3, 0.3),
                         channel_names=["GFP", "RFP"], metadata={"truth": {"k": 1}},
                         compression=compression)
    out = convert_to_ome_zarr(tif, tmp_path / "s.ome.zarr", chunks=(4, 16, 16), version="0.5")
    stack = read_stack(out)
    assert stack.axes == "CZYX" and stack.scale == pytest.approx((1, 2.0, 0.3, 0.3))
    assert stack.channel_names == ["GFP", "RFP"] and stack.metadata["truth"] == {"k": 1}
    np.testing.assert_array_equal(stack.data.compute(), np.moveaxis(tifffile.imread(tif), 1, 0))


def test_convert_memory_stays_near_a_batch(tmp_path, monkeypatch):
    """An 8 MiB compressed TIFF converts with a traced peak under a quarter of its size.

    Peak memory is about four batches (the source region, the TIFF strips it touches, the
    chunks being encoded), whatever the size of the stack.
    """
    data = np.random.default_rng(3).integers(0, 4000, size=(16, 512, 512), dtype=np.uint16)
    tif = tmp_path / "big.ome.tif"
    tifffile.imwrite(tif, data, ome=True, compression="zlib", rowsperstrip=32,
                     metadata={"axes": "ZYX", "PhysicalSizeX": 0.5, "PhysicalSizeY": 0.5})
    monkeypatch.setattr(omezarr_write, "BATCH_BYTES", 2**18)
    _warm_up(tmp_path)
    tracemalloc.start()
    try:
        out = convert_to_ome_zarr(tif, tmp_path / "big.ome.zarr", chunks=(4, 64, 64))
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert peak < data.nbytes / 4, f"peak {peak / 2**20:.1f} MiB"
    np.testing.assert_array_equal(read_ome_zarr(out).data.compute(), data)


def test_convert_refuses_an_existing_target(tmp_path):
    tif = write_ome_tiff(tmp_path / "s.ome.tif", np.zeros((2, 8, 8), np.uint8), axes="ZYX",
                         scale=(1, 1, 1))
    (tmp_path / "s.ome.zarr").mkdir()
    with pytest.raises(FileExistsError, match="s.ome.zarr exists"):
        convert_to_ome_zarr(tif, tmp_path / "s.ome.zarr")


# --------------------------------------------------------------------------- errors


def test_missing_folder_and_folders_that_are_not_ome_zarr(tmp_path):
    import zarr

    with pytest.raises(StackReadError, match="missing.ome.zarr: no such folder"):
        read_stack(tmp_path / "missing.ome.zarr")
    (tmp_path / "empty.zarr").mkdir()
    with pytest.raises(StackReadError, match="empty.zarr: not a Zarr group"):
        read_stack(tmp_path / "empty.zarr")
    zarr.open_group(str(tmp_path / "plain.zarr"), mode="w").create_array("a", shape=(4, 4), dtype="u1")
    with pytest.raises(StackReadError, match="plain.zarr: a Zarr group without NGFF 'multiscales'"):
        read_stack(tmp_path / "plain.zarr")
    zarr.create_array(str(tmp_path / "array.zarr"), shape=(4, 4), dtype="u1")
    with pytest.raises(StackReadError, match="array.zarr: not a Zarr group"):
        read_stack(tmp_path / "array.zarr")


@pytest.mark.parametrize("version", VERSIONS)
def test_missing_or_truncated_chunk_names_the_chunk(tmp_path, version):
    data = np.random.default_rng(4).integers(0, 255, size=(8, 32, 32), dtype=np.uint8)
    path = write_ome_zarr(tmp_path / "b.ome.zarr", data, axes="ZYX", scale=(1, 1, 1),
                          chunks=(4, 16, 16), version=version, levels=1)
    missing = _chunk_file(path, 0, (1, 0, 1), version)
    missing.unlink()
    stack = read_ome_zarr(path)  # opening reads no chunk
    with pytest.raises(StackReadError) as info:
        stack.data.compute()
    assert str(missing) in str(info.value) and "chunk missing or unreadable" in str(info.value)
    np.testing.assert_array_equal(stack.data[:4].compute(), data[:4])  # the rest still reads

    broken = _chunk_file(path, 0, (0, 1, 0), version)
    broken.write_bytes(broken.read_bytes()[:10])
    with pytest.raises(StackReadError, match="chunk missing or unreadable") as info:
        read_ome_zarr(path).data[:4].compute()
    assert str(broken) in str(info.value)


def test_absent_chunks_of_other_writers_read_as_fill_value(tmp_path, caplog):
    """Zarr spec: an absent chunk holds the fill value; ome-zarr's writer (via zarr) skips empty chunks."""
    import zarr

    writer = _ome_zarr_writer()
    from ome_zarr.format import FormatV04

    data = np.ones((8, 16, 16), np.uint8)
    data[:4] = 0
    group = zarr.open_group(str(tmp_path / "sparse.ome.zarr"), mode="w", zarr_format=2)
    writer.write_multiscale([data], group, fmt=FormatV04(), axes="zyx",
                            storage_options={"chunks": (4, 16, 16)})
    with caplog.at_level(logging.WARNING):
        values = read_stack(tmp_path / "sparse.ome.zarr").data.compute()
    np.testing.assert_array_equal(values, data)
    assert "chunk file absent; read as the fill value" in caplog.text


# --------------------------------------------------------------------------- napari reader


def test_napari_reader_declines_other_paths_quickly(tmp_path):
    import time

    from viewer_plugin.io.reader import napari_get_reader

    (tmp_path / "plain.zarr").mkdir()
    (tmp_path / "folder").mkdir()
    start = time.perf_counter()
    assert napari_get_reader(str(tmp_path / "plain.zarr")) is None
    assert napari_get_reader(str(tmp_path / "folder")) is None
    assert napari_get_reader("image.png") is None
    assert time.perf_counter() - start < 0.5


def test_napari_reader_opens_lazy_multiscale_layers_without_reading_level_0(tmp_path, czyx,
                                                                           monkeypatch):
    from viewer_plugin.io.reader import napari_get_reader

    path = write_ome_zarr(tmp_path / "m.ome.zarr", czyx, axes="CZYX", scale=(1, 2.0, 0.3, 0.3),
                          channel_names=["GFP", "RFP"], chunks=(4, 16, 16),
                          translate=(0, 10.0, 0, 1.5))
    reads = []
    original = _zarrstore.ChunkReader.__getitem__

    def counting(self, key):
        reads.append(self.folder.name)
        return original(self, key)

    monkeypatch.setattr(_zarrstore.ChunkReader, "__getitem__", counting)
    reader = napari_get_reader(str(path) + "/")
    layers = reader(str(path) + "/")
    assert "0" not in reads and reads  # contrast limits came from the coarsest level only
    assert [kw["name"] for _, kw, _ in layers] == ["m [GFP]", "m [RFP]"]
    for c, (data, kwargs, kind) in enumerate(layers):
        assert kind == "image" and kwargs["multiscale"] is True
        assert [level.shape for level in data] == [(12, 40, 36), (12, 20, 18)]  # z step 2 > 0.6
        assert all(type(level).__module__.startswith("dask") for level in data)
        assert kwargs["scale"] == pytest.approx((2.0, 0.3, 0.3))
        assert kwargs["axis_labels"] == ("z", "y", "x") and kwargs["units"] == ("µm",) * 3
        assert kwargs["translate"] == pytest.approx((10.0, 0.0, 1.5))
        level1 = read_ome_zarr(path, level=1).data[c].compute()
        assert kwargs["contrast_limits"] == (float(level1.min()), float(level1.max()))
    napari = pytest.importorskip("napari")
    layer = napari.layers.Image(layers[0][0], **layers[0][1])  # napari accepts them (no viewer)
    assert layer.multiscale and layer.scale == pytest.approx((2.0, 0.3, 0.3))
    assert "0" not in reads


def test_napari_writer_hook_saves_ome_zarr_and_refuses_to_replace(tmp_path):
    from viewer_plugin.io.writer import write_image_layer_ome_zarr

    data = np.arange(3 * 4 * 5, dtype=np.uint16).reshape(3, 4, 5)
    meta = {"scale": (2.0, 0.5, 0.5), "axis_labels": ("z", "y", "x"),
            "metadata": {"truth": {"a": 1}, "other": "dropped"}}
    [written] = write_image_layer_ome_zarr(str(tmp_path / "layer"), data, meta)
    assert written.endswith("layer.ome.zarr")
    stack = read_stack(written)
    assert stack.scale == pytest.approx((2.0, 0.5, 0.5)) and stack.metadata["truth"] == {"a": 1}
    np.testing.assert_array_equal(stack.data, data)
    with pytest.raises(FileExistsError):
        write_image_layer_ome_zarr(written, data, meta)


def test_read_stack_dispatches_and_loads_on_request(tmp_path, czyx):
    path = write_ome_zarr(tmp_path / "d.ome.zarr", czyx, axes="CZYX", scale=(1, 1, 1, 1))
    assert type(read_stack(path).data).__module__.startswith("dask")
    loaded = read_stack(str(path) + "/", lazy=False)
    assert isinstance(loaded.data, np.ndarray)
    np.testing.assert_array_equal(loaded.data, czyx)
    attrs = json.loads((path / ".zattrs").read_text(encoding="utf-8"))
    assert attrs["stackdepth"]["every_chunk_written"] is True
