"""The quadric patch maker (plugin ``patch_quadric``) on shapes with known answers."""
from __future__ import annotations

import numpy as np
import pytest
import trimesh
from scipy import sparse
from scipy.sparse import csgraph
from scipy.spatial import cKDTree
from scipy.special import elliprg

from prep import make_registry
from prep.errors import UsageError
from prep.geometry.meshstats import surface_area
from prep.model import Surface
from prep_plugins import check_patches, patch_quadric

SEMI_AXES = (0.07, 0.05, 0.04)  # m, an invented hemisphere-sized ellipsoid


@pytest.fixture(scope="module")
def reg():
    return make_registry(entry_points=False, plugins=[patch_quadric])


def _make(reg, surfaces, inner_skull=None, **options):
    desc = reg.get("patch_maker", "quadric")
    return reg.call(desc, "make", surfaces, inner_skull=inner_skull, **reg.options(desc, options, "test"))


@pytest.fixture(scope="module")
def sphere() -> Surface:
    m = trimesh.creation.icosphere(subdivisions=6, radius=0.07)  # 40,962 vertices
    return Surface(vertices=m.vertices, faces=m.faces, role="cortex")


@pytest.fixture(scope="module")
def ellipsoid() -> Surface:
    # 163,842 vertices: the stretched icosphere needs the finer mesh for 1-degree normals at the tips
    m = trimesh.creation.icosphere(subdivisions=7, radius=1.0)
    return Surface(vertices=m.vertices * SEMI_AXES, faces=m.faces, role="cortex_left")


def _angle_deg(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    a = a / np.linalg.norm(a, axis=1, keepdims=True)
    b = b / np.linalg.norm(b, axis=1, keepdims=True)
    return np.degrees(np.arccos(np.clip(np.einsum("ij,ij->i", a, b), -1, 1)))


@pytest.fixture(scope="module")
def sphere_patches(reg, sphere):
    return _make(reg, [sphere], count=1000)


@pytest.fixture(scope="module")
def ellipsoid_patches(reg, ellipsoid):
    return _make(reg, [ellipsoid], count=1000)


def test_sphere_normals_within_one_degree(sphere_patches) -> None:
    p = sphere_patches
    assert abs(len(p) - 1000) <= 20  # decimation lands near the target
    # analytic normal of a sphere at the centre: the radial direction
    assert _angle_deg(p.normals, p.centres).max() < 1.0  # issue 5: within 1 degree
    assert np.allclose(np.linalg.norm(p.centres, axis=1), 0.07)  # centres are surface vertices


def test_sphere_area_and_partition(sphere, sphere_patches) -> None:
    p = sphere_patches
    analytic = 4 * np.pi * 0.07**2
    assert abs(p.areas.sum() / analytic - 1) < 0.005  # issue 5: within 0.5 % of the analytic area
    assert np.isclose(p.areas.sum(), surface_area(sphere.vertices, sphere.faces), rtol=1e-9, atol=0)
    assert p.vertex_patch.shape == (len(sphere.vertices),)
    assert (p.vertex_patch >= 0).all()  # every vertex in exactly one patch (one label each)
    assert set(np.unique(p.vertex_patch)) == set(range(len(p)))  # no empty patch
    assert (p.spread >= 0).all() and np.degrees(p.spread).max() < 10
    assert set(np.unique(p.hemisphere)) <= {0, 1}


def test_ellipsoid_normals_and_area(ellipsoid, ellipsoid_patches) -> None:
    p = ellipsoid_patches
    a, b, c = SEMI_AXES
    analytic_normal = p.centres / np.array(SEMI_AXES) ** 2  # gradient of x^2/a^2 + y^2/b^2 + z^2/c^2
    assert _angle_deg(p.normals, analytic_normal).max() < 1.0  # issue 5
    # closed form: S = 4 pi a b c R_G(a^-2, b^-2, c^-2), Carlson's symmetric integral (scipy.special.elliprg docs)
    area = 4 * np.pi * a * b * c * elliprg(a**-2, b**-2, c**-2)
    assert abs(p.areas.sum() / area - 1) < 0.005
    assert np.isclose(p.areas.sum(), surface_area(ellipsoid.vertices, ellipsoid.faces), rtol=1e-9, atol=0)
    assert (p.hemisphere == 0).all()  # role cortex_left


def _sulcus_sheet(gap: float = 0.002, depth: float = 0.02, step: float = 0.0005) -> Surface:
    """An open sheet with one deep narrow sulcus along y (invented test shape).

    Cross-section in x-z: flat, a wall down to -depth, a half-circle fundus of
    diameter ``gap``, a wall up, flat. The two walls face each other ``gap`` apart.
    """
    r = gap / 2
    flat = np.arange(-0.02, -r, step)
    left_wall = np.arange(0.0, depth, step)
    arc = np.linspace(np.pi, 2 * np.pi, int(np.pi * r / step) + 2)[1:-1]
    xs = np.concatenate([flat, np.full(len(left_wall), -r), r * np.cos(arc), np.full(len(left_wall), r), -flat[::-1]])
    zs = np.concatenate([np.zeros(len(flat)), -left_wall, -depth + r * np.sin(arc), -left_wall[::-1],
                         np.zeros(len(flat))])
    ys = np.arange(0.0, 0.03, step)
    nx, ny = len(xs), len(ys)
    v = np.stack([np.repeat(xs, ny), np.tile(ys, nx), np.repeat(zs, ny)], axis=1)
    i, j = np.meshgrid(np.arange(nx - 1), np.arange(ny - 1), indexing="ij")
    a = (i * ny + j).ravel()
    b, c, d = a + ny, a + ny + 1, a + 1
    f = np.concatenate([np.stack([a, b, c], 1), np.stack([a, c, d], 1)])
    return Surface(vertices=v, faces=f, role="cortex_left")


def test_sulcus_banks_never_share_a_patch(reg) -> None:
    s = _sulcus_sheet()
    p = _make(reg, [s], count=60)
    v, vp = s.vertices, p.vertex_patch
    assert (vp >= 0).all()
    # the banks: wall vertices between 4 and 16 mm deep (away from the fundus), left x<0, right x>0
    wall = (v[:, 2] < -0.004) & (v[:, 2] > -0.016) & (np.abs(np.abs(v[:, 0]) - 0.001) < 1e-9)
    left = set(vp[wall & (v[:, 0] < 0)])
    right = set(vp[wall & (v[:, 0] > 0)])
    assert not left & right
    # and every patch is connected along the surface
    e = np.concatenate([s.faces[:, [0, 1]], s.faces[:, [1, 2]], s.faces[:, [2, 0]]])
    e = e[vp[e[:, 0]] == vp[e[:, 1]]]
    g = sparse.coo_matrix((np.ones(len(e)), (e[:, 0], e[:, 1])), shape=(len(v), len(v)))
    n_pieces, lab = csgraph.connected_components(g, directed=False)
    assert n_pieces == len(p)
    # the same centres with a Euclidean nearest neighbour WOULD mix the banks (the test is meaningful)
    _, eu = cKDTree(p.centres).query(v)
    assert set(eu[wall & (v[:, 0] < 0)]) & set(eu[wall & (v[:, 0] > 0)])


def test_count_split_by_area(reg) -> None:
    big = trimesh.creation.icosphere(subdivisions=5, radius=0.06)
    small = trimesh.creation.icosphere(subdivisions=5, radius=0.03)  # a quarter of the area
    left = Surface(vertices=big.vertices - [0.07, 0, 0], faces=big.faces, role="cortex_left")
    right = Surface(vertices=small.vertices + [0.05, 0, 0], faces=small.faces, role="cortex_right")
    p = _make(reg, [left, right], count=500)
    n_left, n_right = (p.hemisphere == 0).sum(), (p.hemisphere == 1).sum()
    assert abs(n_left - 400) <= 10 and abs(n_right - 100) <= 5
    assert p.vertex_patch.shape == (len(big.vertices) + len(small.vertices),)
    assert (p.vertex_patch[: len(big.vertices)] < n_left).all()


def test_spacing_option(reg, sphere) -> None:
    p = _make(reg, [sphere], spacing_mm=7.0)
    area = surface_area(sphere.vertices, sphere.faces)
    expected = area / (np.sqrt(3) / 2 * 0.007**2)  # one vertex per sqrt(3)/2 d^2 of a regular triangulation
    assert abs(len(p) / expected - 1) < 0.05


def test_islands_keep_largest_or_fail(reg) -> None:
    big = trimesh.creation.icosphere(subdivisions=4, radius=0.07)
    crumb = trimesh.creation.icosphere(subdivisions=1, radius=0.005)
    v = np.vstack([big.vertices, crumb.vertices + [0, 0, 0.09]])
    f = np.vstack([big.faces, crumb.faces + len(big.vertices)])
    s = Surface(vertices=v, faces=f, role="cortex_left")
    p = _make(reg, [s], count=200)
    (fnd,) = [x for x in p.findings if x.code == "mesh.islands"]
    assert fnd.severity == "warn" and fnd.values["island_vertices"] == len(crumb.vertices)
    assert (p.vertex_patch[len(big.vertices):] == -1).all() and (p.vertex_patch[: len(big.vertices)] >= 0).all()
    assert np.isclose(p.areas.sum(), big.area, rtol=1e-9)
    failed = _make(reg, [s], count=200, islands="fail")
    assert [x.severity for x in failed.findings if x.code == "mesh.islands"] == ["fail"]


def test_open_and_degenerate_cortex_still_works(reg, sphere) -> None:
    f = np.vstack([sphere.faces[30:], [[0, 0, 1]], [[0, 1, 1]]])  # a hole and two zero-area faces
    s = Surface(vertices=sphere.vertices, faces=f, role="cortex")
    p = _make(reg, [s], count=300)
    codes = {x.code: x.severity for x in p.findings}
    assert codes["mesh.open"] == "warn" and codes["mesh.degenerate"] == "warn"
    assert np.isclose(p.areas.sum(), surface_area(s.vertices, s.faces), rtol=1e-9)
    assert np.isfinite(p.normals).all()


def test_non_manifold_cortex_is_reported(reg, sphere) -> None:
    a, b = sphere.faces[0, :2]
    v = np.vstack([sphere.vertices, [[0.0, 0.0, 0.0]]])
    f = np.vstack([sphere.faces, [[b, a, len(sphere.vertices)]]])
    p = _make(reg, [Surface(vertices=v, faces=f, role="cortex")], count=200)
    assert "mesh.non-manifold" in {x.code for x in p.findings}


def test_inner_skull_exclusion(reg) -> None:
    cortex = trimesh.creation.icosphere(subdivisions=4, radius=0.065)
    skull = trimesh.creation.icosphere(subdivisions=4, radius=0.075)
    c = Surface(vertices=cortex.vertices + [0.012, 0, 0], faces=cortex.faces, role="cortex")  # pokes out at +x
    k = Surface(vertices=skull.vertices, faces=skull.faces, role="inner_skull")
    kept = _make(reg, [c], inner_skull=k, count=400, exclude=False)
    assert not {x.code for x in kept.findings} & {"patches.outside", "patches.too-close"}  # left to the check
    check = make_registry(entry_points=False, plugins=[check_patches]).get("check", "patches")
    codes = {x.code: x for x in check.run(patches=kept, inner_skull=k).findings}
    assert codes["patches.outside"].severity == "fail" and codes["patches.too-close"].severity == "warn"
    removed = _make(reg, [c], inner_skull=k, count=400)
    codes = {x.code: x for x in removed.findings}
    n_gone = codes["patches.outside"].values["count"] + codes["patches.too-close"].values["count"]
    assert len(removed) == len(kept) - n_gone
    assert codes["patches.outside"].severity == "warn"
    assert (removed.vertex_patch == -1).any() and removed.vertex_patch.max() == len(removed) - 1
    # every remaining centre at least 5 mm inside the 75 mm skull (exact sphere distance)
    assert (0.075 - np.linalg.norm(removed.centres, axis=1) >= 0.005 - 1e-3).all()


def test_bad_options(reg, sphere) -> None:
    with pytest.raises(UsageError):
        _make(reg, [sphere], islands="merge")
    with pytest.raises(UsageError):
        _make(reg, [], count=10)


def test_inward_wound_cortex_gets_outward_normals(reg, sphere, sphere_patches) -> None:
    inverted = Surface(vertices=sphere.vertices, faces=sphere.faces[:, ::-1], role="cortex")
    p = _make(reg, [inverted], count=1000)
    assert "mesh.inverted" in {x.code for x in p.findings}
    assert (np.einsum("ij,ij->i", p.normals, p.centres) > 0).all()  # radial, outward


def test_one_file_with_both_hemispheres(reg) -> None:
    half = trimesh.creation.icosphere(subdivisions=4, radius=0.05)
    v = np.vstack([half.vertices - [0.055, 0, 0], half.vertices + [0.055, 0, 0]])
    f = np.vstack([half.faces, half.faces + len(half.vertices)])
    p = _make(reg, [Surface(vertices=v, faces=f, role="cortex")], count=200)
    assert "mesh.islands" not in {x.code for x in p.findings}  # two main pieces, not an island
    assert (p.vertex_patch >= 0).all()
    np.testing.assert_array_equal(p.hemisphere, (p.centres[:, 0] > 0).astype(np.int8))  # RAS: +x right
    assert abs((p.hemisphere == 0).sum() - 100) <= 5
