"""cli/bias.py plot: what-if labels are wrapped whole (never cut to '...'), the legend sits outside
the bars."""

from types import SimpleNamespace

import pytest

from truepull.cli import bias as bias_cli

LONG = "sphere 'mass-north' as an ellipsoid of equal mass, flattening 0.001 along (0, 0, 1)"


def _what_if(description, t, g):
    return SimpleNamespace(description=description, torque_ppm=t, G_ppm=g)


@pytest.fixture
def figure(monkeypatch):
    figs = []
    monkeypatch.setattr(bias_cli, "save_figure_atomic", lambda fig, path, **kw: figs.append(fig))
    bias_cli.write_png("x.png", None, [_what_if(LONG, 105.0, -105.0), _what_if("short", 1.0, None)])
    return figs[0]


def test_what_if_labels_keep_every_word(figure):
    ax = figure.axes[0]
    labels = [t.get_text() for t in ax.get_yticklabels()]
    assert " ".join(labels[0].split()) == LONG and "..." not in labels[0]
    assert all(len(line) <= bias_cli.LABEL_WIDTH for line in labels[0].splitlines())


def test_legend_is_outside_the_bars(figure):
    ax = figure.axes[0]
    legend = ax.get_legend()
    assert [t.get_text() for t in legend.get_texts()] == ["torque", "G"]
    assert legend.get_bbox_to_anchor().transformed(ax.transAxes.inverted()).x0 >= 1.0
