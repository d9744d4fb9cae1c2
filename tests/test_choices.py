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
