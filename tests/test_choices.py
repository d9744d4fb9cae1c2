"""The choice lists the command line and the docks read are complete and agree with the kernels."""

from __future__ import annotations

from viewer_plugin.jobs import choices
from viewer_plugin.kernels import attenuation, bleaching, projection


def test_every_choice_has_its_words():
    assert set(choices.METHOD_LABELS) == set(choices.PROJECTION_METHODS) == set(choices.METHOD_WORDS)
    assert set(choices.ATTENUATION_MODEL_LABELS) == set(attenuation.MODELS)
    assert set(choices.RESCALE_LABELS) == set(bleaching.RESCALE)
    assert set(projection.METHODS) <= set(choices.PROJECTION_METHODS)
    assert choices.DEFAULT_METHOD in choices.PROJECTION_METHODS


def test_command_line_offers_the_same_choices():
    """argparse reads its choices from jobs.choices (no second copy)."""
    from viewer_plugin.cli import build_parser

    parser = build_parser()
    sub = next(a for a in parser._actions if a.__class__.__name__ == "_SubParsersAction")
    method = next(a for a in sub.choices["project"]._actions if "--method" in a.option_strings)
    model = next(a for a in sub.choices["attenuation"]._actions if "--model" in a.option_strings)
    rescale = next(a for a in sub.choices["bleaching"]._actions if "--rescale" in a.option_strings)
    assert tuple(method.choices) == choices.PROJECTION_METHODS
    assert tuple(model.choices) == tuple(attenuation.MODELS)
    assert tuple(rescale.choices) == tuple(bleaching.RESCALE)


def test_colour_maps_marked_once_for_dock_and_command_line():
    """Constant-lightness maps first (the default first of all) and marked; maps whose lightness
    varies are marked as mixing depth into brightness, in the dock labels and the --cmap help.
    Lightness: CIELAB L* of each map (skimage.color.rgb2lab, CIE 1976) -- Kovesi 2015 (see
    tests/kernels/test_depth_colour_model.py for the L* check of every constant-lightness map)."""
    import numpy as np
    from skimage.color import rgb2lab

    from viewer_plugin.cli import build_parser

    names = [name for _, name in choices.COLOUR_MAPS]
    assert names[0] == choices.DEFAULT_CMAP == projection.DEFAULT_CMAP
    assert choices.CONSTANT_LIGHTNESS_MAPS == projection.CONSTANT_LIGHTNESS
    assert names[:len(choices.CONSTANT_LIGHTNESS_MAPS)] == list(choices.CONSTANT_LIGHTNESS_MAPS)
    for label, name in choices.COLOUR_MAPS:
        lab = rgb2lab(projection.depth_colours(64, cmap=name)[None])[0, :, 0]
        if name in choices.CONSTANT_LIGHTNESS_MAPS:
            assert "constant lightness" in label and np.ptp(lab) <= 3.0
        else:
            assert "mixes depth into brightness" in label and np.ptp(lab) > 3.0
    sub = next(a for a in build_parser()._actions if a.__class__.__name__ == "_SubParsersAction")
    for command in ("project", "figures"):
        cmap = next(a for a in sub.choices[command]._actions if "--cmap" in a.option_strings)
        assert cmap.help.startswith(choices.CMAP_HELP)
        assert "mixing depth into brightness" in cmap.help and "Constant lightness" in cmap.help
