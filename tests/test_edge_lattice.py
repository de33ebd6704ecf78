"""Switching instants fitted to a periodic lattice (weighted least squares)."""
import numpy as np
import pytest

from wavefit.signal.edge_lattice import periodic_instants


def _square_wave_instants(n_periods=6, period=1.0, duty=0.4, first=0.3):
    rising = first + period * np.arange(n_periods)
    falling = rising + duty * period
    t0 = np.sort(np.concatenate((rising, falling)))
    directions = np.where(np.isin(t0, rising), 1, -1)
    return t0, directions


def test_prediction_deviation_matches_monte_carlo_scatter():
    # weighted least squares: the predicted instants scatter by sqrt(diag(X (XᵀWX)⁻¹ Xᵀ))
    # (Gauss–Markov); checked against the scatter of 2000 draws with known deviations
    truth, directions = _square_wave_instants()
    deviations = np.linspace(0.01, 0.03, truth.size)
    rng = np.random.default_rng(1)
    predictions, stated = [], []
    for _ in range(2000):
        out = periodic_instants(truth + rng.standard_normal(truth.size) * deviations, deviations, directions)
        assert out is not None
        predictions.append(out[0])
        stated.append(out[1])
    predictions, stated = np.array(predictions), np.array(stated)
    scatter = predictions.std(axis=0)
    assert np.all(np.abs(predictions.mean(axis=0) - truth) < 4 * scatter / np.sqrt(2000))
    # stated deviations are enlarged by the Birge ratio only when it exceeds one: their mean
    # sits a little above the true scatter, never below it
    ratio = stated.mean(axis=0) / scatter
    assert np.all((ratio > 0.97) & (ratio < 1.25)), ratio
    # every instant rests on the whole record: tighter than the separate instants
    assert np.all(scatter < deviations) and scatter.mean() < 0.6 * deviations.mean()


def test_missing_edges_keep_their_cycle_numbers():
    truth, directions = _square_wave_instants()
    keep = np.ones(truth.size, bool)
    keep[[3, 4, 7]] = False
    out = periodic_instants(truth[keep], np.full(keep.sum(), 1e-3), directions[keep])
    assert out is not None
    np.testing.assert_allclose(out[0], truth[keep], atol=1e-12)


@pytest.mark.parametrize("spread", [0.25, 0.05])
def test_instants_that_are_not_periodic_are_left_alone(spread):
    truth, directions = _square_wave_instants()
    rng = np.random.default_rng(2)
    moved = truth + rng.uniform(-spread, spread, truth.size)  # a hand-switched or jittering source
    assert periodic_instants(moved, np.full(truth.size, 1e-3), directions) is None


def test_too_few_instants_for_a_consistency_check():
    truth, directions = _square_wave_instants(n_periods=1)
    assert periodic_instants(truth, np.full(2, 1e-3), directions) is None
