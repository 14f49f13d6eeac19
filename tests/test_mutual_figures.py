"""Mutual-information and ordering figures: what they draw and what they refuse."""

import numpy as np
import pytest

import bondscope

pytest.importorskip("matplotlib")


def _bell_pairs():
    bell = np.eye(2) / np.sqrt(2)
    return np.einsum("ac,bd->abcd", bell, bell)       # pairs (1, 3) and (2, 4)


def test_mutual_figure_panels_and_cli(tmp_path, capsys):
    from bondscope._cli import main

    result = bondscope.mutual_information(_bell_pairs())
    fig = bondscope.mutual_figure(result)
    titles = [ax.get_title(loc="left") for ax in fig.axes]
    assert any(t.startswith("Decay:") for t in titles)
    assert len(fig.axes) == 4                          # map, its colour bar, I(r), s_i
    saved = tmp_path / "m.json"
    result.save(saved)
    assert main(["plot", str(saved), "--kind", "mutual", "-o", str(tmp_path / "m.png")]) == 0
    assert (tmp_path / "m.png").stat().st_size > 1000
    assert main(["plot", str(saved), "--kind", "ordering", "-o", str(tmp_path / "o.svg")]) == 0
    assert "ordering figure written" in capsys.readouterr().out


def test_ordering_figure_draws_before_and_after():
    fig = bondscope.ordering_figure(bondscope.mutual_information(_bell_pairs()))
    entropy_axes = fig.axes[0]
    labels = [line.get_label() for line in entropy_axes.get_lines()]
    assert labels == ["current order", "suggested order"]
    assert max(entropy_axes.get_lines()[0].get_ydata()) == pytest.approx(2 * np.log(2))


REFUSED = [
    # source, figure, message
    (lambda: bondscope.mutual_information(np.eye(2).reshape(-1) / np.sqrt(2)),
     bondscope.ordering_figure, "no reordered profile"),
    (lambda: [bondscope.mutual_information(_bell_pairs())] * 2, bondscope.mutual_figure,
     "draws one state"),
]


@pytest.mark.parametrize("source,figure,message", REFUSED)
def test_refusals(source, figure, message):
    with pytest.raises(ValueError, match=message):
        figure(source())
