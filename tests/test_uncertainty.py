"""Monte Carlo: the deterministic answer at zero spread, reproducible seeds, the declared
distributions, percentile bands, located errors.

References: the steady solve itself (zero spread must give it back); numpy's
``SeedSequence.spawn`` (the documented way to derive independent streams);
scipy.stats distributions and the Kolmogorov-Smirnov test for the draws;
numpy.percentile for the bands.
"""

import numpy as np
import pytest
import scipy.stats as stats

from calib_networks import random_network
from vesselnet.demos import demo_path
from vesselnet.engine import Execution
from vesselnet.errors import NetworkSpecError
from vesselnet.reader import load_network
from vesselnet.solve import solve
from vesselnet.uncertainty import (load_uncertainty, read_uncertainty, run_uncertainty, sample_network,
                                   sample_rng)
from vesselnet.yamlread import load_text

SEED = 20240611


def spec_of(text: str, network, file="u.yaml"):
    return read_uncertainty(load_text("vesselnet: 1\nuncertainty:\n" + text, file), network, file)


def leg_with_lesion():
    import dataclasses

    net = load_network(demo_path("leg"))
    v = net.vessels
    red, length = v.stenosis_reduction.copy(), v.stenosis_length_m.copy()
    red[v.index["sfa_mid"]], length[v.index["sfa_mid"]] = 0.6, 0.03
    return dataclasses.replace(net, vessels=dataclasses.replace(v, stenosis_reduction=red,
                                                                stenosis_length_m=length))


ZERO = """  - {vessels: all, quantity: radius, distribution: lognormal, relative: 0%}
  - {vessels: all, quantity: length, distribution: normal, relative: 0%}
  - {beds: all, quantity: resistance, distribution: uniform, relative: 0%}
  - {vessel: sfa_mid, quantity: stenosis, distribution: normal, absolute: 0}
"""


def test_zero_uncertainty_returns_the_deterministic_answer():
    """Every spread zero: each sample is the nominal network, so every sample's shares and
    pressures are those of the ordinary steady solve (to rounding)."""
    net = leg_with_lesion()
    mc = run_uncertainty(net, spec_of(ZERO, net), samples=12, seed=SEED)
    nominal = solve(net)
    np.testing.assert_allclose(mc.bed_share, np.tile(nominal.bed_share, (12, 1)), rtol=1e-12, atol=0)
    np.testing.assert_allclose(mc.node_pressure_pa, np.tile(nominal.pressure_pa, (12, 1)), rtol=1e-12)
    band = mc.band(mc.bed_share)
    np.testing.assert_allclose(band, np.tile(nominal.bed_share, (3, 1)), rtol=1e-12)


SPREAD = """  - {vessels: all, quantity: radius, distribution: lognormal, relative: 5%}
  - {beds: all, quantity: resistance, distribution: normal, relative: 10%}
  - {tag: collateral, quantity: radius, distribution: uniform, relative: 20%, shared: true}
  - {vessel: sfa_mid, quantity: stenosis, distribution: uniform, absolute: 10%}
"""


def test_a_seed_reproduces_a_run_exactly():
    net = leg_with_lesion()
    spec = spec_of(SPREAD, net)
    a = run_uncertainty(net, spec, samples=30, seed=SEED)
    b = run_uncertainty(net, spec, samples=30, seed=SEED, chunk_size=7)
    c = run_uncertainty(net, spec, samples=30, seed=SEED + 1)
    for key in ("bed_share", "bed_flow_m3_s", "bed_pressure_pa", "inflow_m3_s", "node_pressure_pa"):
        np.testing.assert_array_equal(getattr(a, key), getattr(b, key))
    assert not np.array_equal(a.bed_share, c.bed_share)
    assert a.bed_share.std(axis=0).min() > 0


def test_sample_streams_are_the_spawned_children():
    """Sample i draws from the i-th child of SeedSequence(seed).spawn(n) (numpy's documented
    way of independent streams), so no sample depends on which others were drawn."""
    children = np.random.SeedSequence(SEED).spawn(5)
    for i in (0, 3, 4):
        np.testing.assert_array_equal(sample_rng(SEED, i).random(8), np.random.default_rng(children[i]).random(8))


def test_local_processes_give_identical_numbers():
    net = leg_with_lesion()
    spec = spec_of(SPREAD, net)
    here = run_uncertainty(net, spec, samples=24, seed=SEED)
    there = run_uncertainty(net, spec, samples=24, seed=SEED, execution=Execution(workers=2), chunk_size=5)
    for key in ("bed_share", "bed_pressure_pa", "inflow_m3_s", "node_pressure_pa"):
        np.testing.assert_array_equal(getattr(here, key), getattr(there, key))
    assert there.execution == "2 local processes"


NOMINAL_R = 1e9
DRAWS = 3000
DISTRIBUTIONS = [
    ("lognormal, relative: 20%", stats.lognorm(s=0.2, scale=NOMINAL_R)),
    ("normal, relative: 10%", stats.norm(loc=NOMINAL_R, scale=0.1 * NOMINAL_R)),
    ("uniform, relative: 30%", stats.uniform(loc=0.7 * NOMINAL_R, scale=0.6 * NOMINAL_R)),
    ("normal, absolute: 0.75 mmHg*s/mL", stats.norm(loc=NOMINAL_R, scale=0.75 * 133.322387415e6)),
]


@pytest.mark.parametrize("declared,reference", DISTRIBUTIONS, ids=[d[0] for d in DISTRIBUTIONS])
def test_draws_follow_the_declared_distribution(declared, reference):
    """Kolmogorov-Smirnov test of 3000 draws of one bed's resistance against scipy.stats."""
    rng = np.random.default_rng(5519)
    net = random_network(rng)
    import dataclasses

    beds = dataclasses.replace(net.beds, resistance_pa_s_m3=np.full(len(net.beds), NOMINAL_R))
    net = dataclasses.replace(net, beds=beds)
    distribution, spread = declared.split(", ")
    spec = spec_of(f"  - {{bed: {net.beds.ids[0]}, quantity: resistance, distribution: {distribution}, "
                   f"{spread}}}\n", net)
    draws = np.array([sample_network(net, spec, 4242, i).beds.resistance_pa_s_m3[0] for i in range(DRAWS)])
    assert stats.kstest(draws, reference.cdf).pvalue > 1e-3
    others = np.array([sample_network(net, spec, 4242, i).beds.resistance_pa_s_m3[1:] for i in range(3)])
    assert (others == NOMINAL_R).all()


def test_shared_draw_moves_every_target_alike():
    net = load_network(demo_path("leg"))
    spec = spec_of("  - {tag: collateral, quantity: radius, distribution: normal, relative: 10%, shared: true}\n", net)
    rows = net.vessels.tags["collateral"]
    for i in range(4):
        ratio = sample_network(net, spec, 77, i).vessels.radius_in_m[rows] / net.vessels.radius_in_m[rows]
        assert np.ptp(ratio) < 1e-15 and ratio[0] != 1.0


def test_bands_are_numpy_percentiles():
    net = load_network(demo_path("collateral"))
    mc = run_uncertainty(net, spec_of(SPREAD.splitlines()[0] + "\n", net), samples=40, seed=SEED)
    np.testing.assert_array_equal(mc.band(mc.bed_share), np.percentile(mc.bed_share, [5, 50, 95], axis=0))
    table = mc.bed_bands()
    np.testing.assert_array_equal(table["share_p95"], np.percentile(mc.bed_share, 95, axis=0))


def test_progress_is_reported_to_the_end():
    net = load_network(demo_path("collateral"))
    seen = []
    run_uncertainty(net, spec_of(SPREAD.splitlines()[0] + "\n", net), samples=25, seed=SEED, chunk_size=4,
                    progress=lambda done, total: seen.append((done, total)))
    assert seen[-1] == (25, 25) and [d for d, _ in seen] == sorted(d for d, _ in seen)


BAD = [
    ("  - {vessels: all, quantity: diameter, distribution: normal, relative: 5%}\n", r"unknown quantity 'diameter'"),
    ("  - {beds: all, quantity: radius, distribution: normal, relative: 5%}\n", r"'radius' is a vessel quantity"),
    ("  - {vessels: all, quantity: radius, distribution: lognormal, absolute: 0.1 mm}\n", r"lognormal spread is relative"),
    ("  - {vessel: sfa_prox, quantity: stenosis, distribution: normal, absolute: 5%}\n", r"without a lesion: 'sfa_prox'"),
    ("  - {vessel: sfa_mdi, quantity: radius, distribution: normal, relative: 5%}\n", r"no vessel 'sfa_mdi'.*'sfa_mid'"),
    ("  - {vessels: all, quantity: radius, distribution: gaussian, relative: 5%}\n", r"unknown distribution 'gaussian'"),
    ("  - {vessels: all, quantity: radius, distribution: normal}\n", r"missing the spread"),
    ("  - {vessels: all, quantity: radius, distribution: normal, relative: 5%, absolute: 1}\n", r"exactly one of 'relative'"),
    ("  - {tag: nerve, quantity: radius, distribution: normal, relative: 5%}\n", r"no vessel carries the tag 'nerve'"),
    ("  - {vessels: all, beds: all, quantity: radius, distribution: normal, relative: 5%}\n", r"exactly one target"),
    ("  - {vessels: all, quantity: radius, distribution: uniform, relative: 120%}\n", r"half-width must be below 100"),
]


@pytest.mark.parametrize("text,pattern", BAD, ids=[b[1][:30] for b in BAD])
def test_bad_uncertainty_entries_are_located(text, pattern):
    net = load_network(demo_path("leg"))
    with pytest.raises(NetworkSpecError, match=r"u\.yaml:3:\d+ .*" + pattern):
        spec_of(text, net)


def test_too_wide_a_spread_is_an_error_naming_the_sample():
    net = load_network(demo_path("leg"))
    spec = spec_of("  - {vessels: all, quantity: radius, distribution: normal, relative: 300%}\n", net)
    with pytest.raises(NetworkSpecError, match=r"u\.yaml:3:\d+ uncertainty\[0\].*sample \d+ drew a radius <= 0"):
        run_uncertainty(net, spec, samples=5, seed=SEED)


def test_error_from_a_worker_process_arrives_whole():
    """A located input error raised in a worker process is re-raised here with its location."""
    net = load_network(demo_path("collateral"))
    spec = spec_of("  - {vessels: all, quantity: radius, distribution: normal, relative: 300%}\n", net)
    with pytest.raises(NetworkSpecError, match=r"^u\.yaml:3:\d+ uncertainty\[0\] \(radius of all vessels\)") as info:
        run_uncertainty(net, spec, samples=8, seed=SEED, execution=Execution(workers=2), chunk_size=2)
    assert info.value.problems[0].line == 3


def test_demo_uncertainty_file_reads():
    net = load_network(demo_path("leg"))
    spec = load_uncertainty(demo_path("leg_uncertainty"), net)
    assert spec.samples == 400 and spec.seed == 20240611 and len(spec.entries) == 4
    assert spec.entries[3].shared and list(spec.entries[3].rows) == list(net.vessels.tags["collateral"])
