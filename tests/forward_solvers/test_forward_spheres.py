"""Concentric-spheres forward solver against closed forms, brute-force series and invariants."""
from __future__ import annotations

import numpy as np
import pytest
from scipy.special import eval_legendre, lpmv

import prep_plugins.forward_spheres as spheres_plugin
from prep import UsageError, VolumeConductor, make_registry
from prep.forward import build_forward, forward_from_state, forward_state, sphere_conductor
from prep_plugins import _forward_spheres_series as series

R = 0.1                                      # outer radius, m (round number, from memory: adult head ~0.09-0.1 m)
SIG3 = np.array([0.33, 0.0042, 0.33])        # S/m, brain/skull/scalp, Rush & Driscoll 1968 (1:80)
RAD3 = R * np.array([0.87, 0.92, 1.0])       # radii fractions, Rush & Driscoll 1968 (8.0/8.5/9.2 cm)


def _conductor(radii, sig):
    return VolumeConductor(kind="spheres", centre=np.zeros(3), radii=radii, conductivities=sig)


def _sensors(n, seed=0):
    rng = np.random.default_rng(seed)
    p = rng.normal(size=(n, 3))
    return R * p / np.linalg.norm(p, axis=1)[:, None]


def _build(radii, sig, n_sensors=64, **kw):
    pos = _sensors(n_sensors)
    return spheres_plugin.build(_conductor(radii, sig), [f"E{i}" for i in range(n_sensors)], pos, **kw)


def _frank(sensors, r0, q, sigma):
    """Homogeneous sphere, closed form (Frank 1952; Brody, Terry & Ideker 1973), no reference."""
    d = sensors - r0
    dn = np.linalg.norm(d, axis=1)
    rn = np.linalg.norm(sensors, axis=1)
    rd = np.einsum("ij,ij->i", sensors, d)
    term = (dn[:, None] * sensors + rn[:, None] * d) / (rn * dn * (rn * dn + rd))[:, None]
    return (2 * d @ q / dn**3 + term @ q) / (4 * np.pi * sigma)


def _brute(sensors, r0, q, radii, sig, n_terms=1500):
    """Direct Legendre sum with exact shell factors and many terms (scipy Legendre functions)."""
    c = series.shell_weights(radii, sig, n_terms)[1:, None]
    n = np.arange(1, n_terms + 1)[:, None]
    b = np.linalg.norm(r0)
    f = b / radii[-1]
    rh = sensors / np.linalg.norm(sensors, axis=1)[:, None]
    t = np.clip(rh @ r0 / b, -1, 1)[None, :]
    p = eval_legendre(n, t)
    dp = -lpmv(1, n, t) / np.sqrt(1 - t * t)          # P_n^1 = -sqrt(1-t^2) P_n' (Condon-Shortley)
    s1 = np.sum((2 * n + 1) * c * f ** (n - 1) * p, axis=0)
    s2 = np.sum((2 * n + 1) / n * c * f ** (n - 1) * dp, axis=0)
    qr = q @ r0 / b
    return (qr * s1 + (rh @ q - t[0] * qr) * s2) / (4 * np.pi * sig[-1] * radii[-1] ** 2)


def _rel(a, b):
    return np.abs(a - b).max() / np.abs(b).max()


def _dipole(ecc, radius, kind, seed):
    rng = np.random.default_rng(seed)
    u = rng.normal(size=3)
    u /= np.linalg.norm(u)
    r0 = ecc * radius * u
    if kind == "radial":
        return r0, u
    v = np.cross(u, rng.normal(size=3))
    return r0, v / np.linalg.norm(v)


@pytest.mark.parametrize("ecc", [0.1, 0.3, 0.5, 0.7, 0.9, 0.95, 0.98])
@pytest.mark.parametrize("kind", ["radial", "tangential"])
@pytest.mark.parametrize("shells", [1, 3])
def test_equal_conductivities_match_homogeneous_closed_form(ecc, kind, shells):
    # 1e-6 relative to the largest |V| of the dipole: issue 2 (Frank 1952; Brody, Terry & Ideker 1973)
    radii = np.array([R]) if shells == 1 else R * np.array([0.985, 0.99, 1.0])
    sig = np.full(shells, 0.33)
    fm = _build(radii, sig)
    r0, q = _dipole(ecc, R, kind, seed=int(ecc * 100))
    got = fm.evaluate(r0[None], q[None])[:, 0]
    want = _frank(fm.sensor_positions, r0, q, 0.33)
    want -= want.mean()
    assert _rel(got, want) < 1e-6


def test_radial_dipole_at_centre_closed_form():
    # V = 3 q cos(theta) / (4 pi sigma R^2) (Frank 1952), homogeneous sphere
    fm = _build(np.array([R]), np.array([0.33]), reference="E0")
    q = np.array([0.0, 0.0, 1.0])
    got = fm.evaluate(np.zeros((1, 3)), q[None])[:, 0]
    cos = fm.sensor_positions[:, 2] / R
    want = 3 * cos / (4 * np.pi * 0.33 * R**2)
    want -= want[0]
    assert _rel(got, want) < 1e-7          # default tolerance 1e-8; issue 2 asks for 1e-6


MODELS = {
    "3-shell": (RAD3, SIG3),
    # CSF 1.79 S/m (Baumann et al. 1997); brain 0.33 and skull 1:80 (Rush & Driscoll 1968)
    "4-shell": (R * np.array([0.84, 0.87, 0.92, 1.0]), np.array([0.33, 1.79, 0.0042, 0.33])),
    # invented contrasts so that alpha != 0 (the 3-shell default has alpha = 0 by symmetry)
    "2-shell": (R * np.array([0.9, 1.0]), np.array([0.33, 0.05])),
}


def _backends():
    try:
        import numba  # noqa: F401
    except ImportError:
        return ["numpy"]
    return ["numpy", "numba"]


@pytest.mark.parametrize("backend", _backends())
@pytest.mark.parametrize("ecc", [0.05, 0.3, 0.6, 0.9, 0.98])
@pytest.mark.parametrize("model", sorted(MODELS))
def test_accelerated_sum_matches_brute_force(ecc, model, backend):
    # the closed-form tail + remainder series agrees with 1500 plain terms; 1e-6 relative (issue 2)
    radii, sig = MODELS[model]
    fm = _build(radii, sig, n_sensors=24, backend=backend)
    for kind in ("radial", "tangential"):
        r0, q = _dipole(ecc, radii[0], kind, seed=7)
        got = fm.evaluate(r0[None], q[None])[:, 0]
        want = _brute(fm.sensor_positions, r0, q, radii, sig)
        want -= want.mean()
        assert _rel(got, want) < 1e-6


def test_asymptote_matches_shell_factors():
    # c_n - c_inf - alpha/(2n+1) = O(n^-2): checked at large n on the 2-shell model above
    radii, sig = MODELS["2-shell"]
    c = series.shell_weights(radii, sig, 4000)
    c_inf, alpha = series.asymptote(sig)
    assert alpha != 0
    for n in (1000, 4000):
        assert abs(c[n] - c_inf - alpha / (2 * n + 1)) < 5 / n**2


def test_shell_factors_match_boundary_value_system():
    # c_n from the transfer-matrix recursion == direct solve of the interface conditions
    # (continuity of potential and normal current, no current through the outer surface: textbook)
    c = series.shell_weights(RAD3, SIG3, 30)
    for n in (1, 2, 5, 12, 30):
        a = np.zeros((5, 5))
        rhs = np.zeros(5)
        # unknowns: a1 (shell 1, b1 = 1), a2, b2, a3, b3
        for row, (k, r) in enumerate(((0, RAD3[0]), (1, RAD3[1]))):
            for cond in range(2):
                for shell, sign in ((k, 1.0), (k + 1, -1.0)):
                    s = SIG3[shell] if cond else 1.0
                    fa = r**n if not cond else n * r ** (n - 1)
                    fb = r ** (-n - 1) if not cond else -(n + 1) * r ** (-n - 2)
                    ia = 0 if shell == 0 else 2 * shell - 1
                    a[2 * row + cond, ia] += sign * s * fa
                    if shell == 0:
                        rhs[2 * row + cond] -= sign * s * fb
                    else:
                        a[2 * row + cond, ia + 1] += sign * s * fb
        a[4, 3], a[4, 4] = n * R ** (n - 1), -(n + 1) * R ** (-n - 2)
        sol = np.linalg.solve(a, rhs)
        v_outer = sol[3] * R**n + sol[4] * R ** (-n - 1)
        want = v_outer * R ** (n + 1) * n / (2 * n + 1) * SIG3[-1] / SIG3[0]
        assert c[n] == pytest.approx(want, rel=1e-10)


def test_linearity_in_the_moment():
    fm = _build(RAD3, SIG3)
    rng = np.random.default_rng(3)
    pos = rng.uniform(-0.04, 0.04, size=(5, 3))
    free = fm.evaluate(pos, None)
    q1, q2 = rng.normal(size=(5, 3)), rng.normal(size=(5, 3))
    v1, v2 = fm.evaluate(pos, q1), fm.evaluate(pos, q2)
    atol = 1e-12 * np.abs(v1).max()
    np.testing.assert_allclose(fm.evaluate(pos, 2.5 * q1 - q2), 2.5 * v1 - v2, rtol=1e-10, atol=atol)
    np.testing.assert_allclose(v1, np.einsum("nmk,mk->nm", free, q1), rtol=1e-10, atol=atol)


def test_no_net_current_leaves_the_head():
    # integral of the potential over the outer sphere is 0 (Gauss-Legendre x uniform azimuth quadrature)
    x, wx = np.polynomial.legendre.leggauss(80)
    phi = np.arange(160) * 2 * np.pi / 160
    ct, ph = np.meshgrid(x, phi, indexing="ij")
    st = np.sqrt(1 - ct**2)
    dirs = np.stack([st * np.cos(ph), st * np.sin(ph), ct], axis=-1).reshape(-1, 3)
    w = (wx[:, None] * np.full(phi.shape, 2 * np.pi / 160)[None, :]).ravel()
    weights = series.weights_for(RAD3, SIG3, 0.6 * 0.87, 1e-9)
    src = np.array([[0.02, -0.01, 0.03], [0.0, 0.05, 0.0]])
    v = series.chunk_potentials(dirs, src, None, weights, R, 1e-9)    # (n, 2, 3), unreferenced
    integral = np.einsum("n,nmk->mk", w, v)
    assert np.abs(integral).max() < 1e-6 * np.einsum("n,nmk->mk", w, np.abs(v)).max()


def test_four_shells_reduce_to_three_when_two_share_a_conductivity():
    four = _build(R * np.array([0.84, 0.87, 0.92, 1.0]), np.array([0.33, 0.33, 0.0042, 0.33]))
    three = _build(RAD3, SIG3)
    pos = np.array([[0.01, 0.02, 0.07], [-0.05, 0.0, 0.06], [0.0, 0.0, 0.0]])
    np.testing.assert_allclose(four.evaluate(pos, None), three.evaluate(pos, None), rtol=1e-9,
                               atol=1e-9 * np.abs(three.evaluate(pos, None)).max())


def test_average_reference_columns_sum_to_zero_and_reference_row_is_zero():
    pos = np.array([[0.01, 0.02, 0.05], [0.03, -0.02, 0.06]])
    avg = _build(RAD3, SIG3).evaluate(pos, None)
    assert np.abs(avg.sum(axis=0)).max() < 1e-12 * np.abs(avg).max()
    fm = _build(RAD3, SIG3, reference="E5")
    ref = fm.evaluate(pos, None)
    assert np.all(ref[5] == 0.0)
    # changing the reference only subtracts a constant per column (common practice)
    np.testing.assert_allclose(ref - ref.mean(axis=0), avg, atol=1e-12 * np.abs(avg).max())


def test_unknown_reference_and_outside_sources_are_usage_errors():
    with pytest.raises(UsageError, match="reference electrode 'Cz'"):
        _build(RAD3, SIG3, reference="Cz")
    fm = _build(RAD3, SIG3)
    with pytest.raises(UsageError, match="source 1 "):
        fm.evaluate(np.array([[0.0, 0.0, 0.01], [0.0, 0.0, 0.0871]]), None)


def test_electrodes_are_projected_onto_the_outer_sphere():
    pos = _sensors(10) * np.linspace(0.9, 1.2, 10)[:, None]
    fm = spheres_plugin.build(_conductor(RAD3, SIG3), [f"E{i}" for i in range(10)], pos)
    np.testing.assert_allclose(np.linalg.norm(fm.sensor_positions, axis=1), R, rtol=1e-14)


def test_registry_build_and_bundle_state_round_trip():
    reg = make_registry(entry_points=False, plugins=[spheres_plugin])
    cond = sphere_conductor(_sensors(32) + [0.001, 0.002, 0.03], frame="anatomy")
    labels = [f"E{i}" for i in range(32)]
    fm = build_forward(reg, cond, labels, _sensors(32) + [0.001, 0.002, 0.03], options={"tolerance": 1e-9})
    manifest, arrays = forward_state(fm)
    again = forward_from_state(reg, cond, manifest, arrays)
    pos = cond.centre + np.array([[0.01, 0.0, 0.02]])
    assert np.array_equal(fm.evaluate(pos, None), again.evaluate(pos, None))
    assert manifest["forward"]["solver"] == "spheres" and again.params["tolerance"] == 1e-9
    with pytest.raises(UsageError, match="unknown option"):
        build_forward(reg, cond, labels, _sensors(32), options={"order": 3})


def test_threads_and_blocks_do_not_change_the_result():
    rng = np.random.default_rng(9)
    u = rng.normal(size=(300, 3))
    pos = 0.08 * rng.uniform(0, 1, (300, 1)) * u / np.linalg.norm(u, axis=1)[:, None]
    nrm = rng.normal(size=(300, 3))
    one = _build(RAD3, SIG3, workers=1)
    many = _build(RAD3, SIG3, workers=2, chunk_elements=64 * 16)      # 16 sources per block
    for normals in (None, nrm):
        a, b = one.evaluate(pos, normals), many.evaluate(pos, normals)
        assert a.shape == b.shape
        np.testing.assert_allclose(a, b, rtol=0, atol=1e-7 * np.abs(a).max())


def test_compiled_and_numpy_backends_agree():
    # two evaluations of the same series, each within tolerance 1e-9 of the exact sum: they agree to ~2e-9
    pytest.importorskip("numba")
    rng = np.random.default_rng(11)
    u = rng.normal(size=(200, 3))
    pos = RAD3[0] * rng.uniform(0, 0.99, (200, 1)) * u / np.linalg.norm(u, axis=1)[:, None]
    pos[0] = 0.0                                                      # the centre itself
    nrm = rng.normal(size=(200, 3))
    for reference in ("average", "E3"):
        kw = dict(tolerance=1e-9, reference=reference, chunk_elements=64 * 50)
        fast, slow = _build(RAD3, SIG3, backend="numba", **kw), _build(RAD3, SIG3, backend="numpy", **kw)
        for normals in (None, nrm):
            a, b = fast.evaluate(pos, normals), slow.evaluate(pos, normals)
            assert a.shape == b.shape
            scale = np.abs(b).reshape(64, 200, -1).max(axis=(0, 2))     # per source, as the criterion
            err = np.abs(a - b).reshape(64, 200, -1).max(axis=(0, 2))
            assert np.all(err <= 1e-8 * scale)
            if reference == "E3":
                assert np.all(a[3] == 0.0)


def test_unknown_backend_is_a_usage_error():
    with pytest.raises(UsageError, match="backend"):
        _build(RAD3, SIG3, backend="gpu")
