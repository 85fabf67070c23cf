"""Built-in plugin ``surface_gifti``: GIfTI surfaces (``.surf.gii``, ``.gii``) through nibabel.

A GIfTI surface holds a pointset data array (intent ``NIFTI_INTENT_POINTSET``)
and a triangle data array (``NIFTI_INTENT_TRIANGLE``). The standard has no
unit field; coordinates are millimetres by convention. A unit stated in the
pointset's or the file's metadata (keys ``Units``, ``Unit``, ``LengthUnit``,
any case) is honoured; otherwise millimetres are assumed with an
``input.units-suspect`` finding (``info`` if the size agrees, else the size
decides, see :mod:`prep.geometry.meshunits`). The user's ``units=`` wins.
"""
from __future__ import annotations

from pathlib import Path
from xml.parsers.expat import ExpatError

import numpy as np

from prep import hookimpl
from prep.descriptors import SurfaceReader
from prep.errors import ReadError
from prep.geometry.meshunits import surface_from_file_arrays
from prep.model import Surface

UNIT_KEYS = ("units", "unit", "lengthunit", "length_unit", "spatialunits")


def _declared_unit(*metas: object) -> str | None:
    for meta in metas:
        items = dict(meta).items() if meta is not None else ()
        for key, value in items:
            if str(key).strip().lower() in UNIT_KEYS and str(value).strip():
                return str(value).strip()
    return None


def read_gifti(path: str | Path, units: str | None = None) -> Surface:
    """Read a GIfTI surface.

    Parameters
    ----------
    path : path
    units : str, optional
        Overrides any unit in the file (``m``, ``cm``, ``mm``).

    Returns
    -------
    Surface
        Vertices (n, 3) float64 metres, faces (k, 3) int64, role ``"unknown"``.

    Raises
    ------
    ReadError
        Not GIfTI, no pointset or triangle array (the data-array number is named),
        a metadata unit that is not a length unit.
    """
    import nibabel as nib
    from nibabel.filebasedimages import ImageFileError

    p = Path(path)
    if p.stat().st_size == 0:
        raise ReadError(p, None, "file is empty")
    try:
        img = nib.load(str(p))
    except (ImageFileError, ExpatError, ValueError, OSError, KeyError, TypeError) as exc:
        raise ReadError(p, None, f"not a readable GIfTI file ({type(exc).__name__}: {exc})") from exc
    if not isinstance(img, nib.gifti.GiftiImage):
        raise ReadError(p, None, f"not a GIfTI image (nibabel read a {type(img).__name__})")
    intents = [nib.nifti1.intent_codes.niistring[d.intent] for d in img.darrays]
    points = [d for d in img.darrays if d.intent == nib.nifti1.intent_codes["NIFTI_INTENT_POINTSET"]]
    tris = [d for d in img.darrays if d.intent == nib.nifti1.intent_codes["NIFTI_INTENT_TRIANGLE"]]
    if len(points) != 1 or len(tris) != 1:
        raise ReadError(p, None, f"expected one POINTSET and one TRIANGLE data array, found intents "
                                 f"{intents or 'none'}")
    vertices = np.asarray(points[0].data, dtype=np.float64)
    faces = np.asarray(tris[0].data)
    rec = img.darrays.index(points[0]) + 1
    if vertices.ndim != 2 or vertices.shape[1] != 3 or vertices.shape[0] == 0:
        raise ReadError(p, rec, f"data array {rec} (POINTSET) must be (n, 3), got {vertices.shape}")
    rec = img.darrays.index(tris[0]) + 1
    if faces.ndim != 2 or faces.shape[1] != 3 or faces.shape[0] == 0 or not np.issubdtype(faces.dtype, np.integer):
        raise ReadError(p, rec, f"data array {rec} (TRIANGLE) must be (k, 3) integers, got {faces.shape} "
                                f"{faces.dtype}")
    faces = faces.astype(np.int64)
    if faces.min() < 0 or faces.max() >= len(vertices):
        raise ReadError(p, rec, f"data array {rec} (TRIANGLE) indexes vertices outside 0..{len(vertices) - 1}")
    declared = _declared_unit(points[0].meta, img.meta)
    return surface_from_file_arrays(vertices, faces, file=str(p), reader="gifti", option=units,
                                    declared=declared, convention="mm")


@hookimpl
def headprep_register_surface_readers() -> list[SurfaceReader]:
    return [SurfaceReader(name="gifti", suffixes=(".gii", ".surf.gii"), read=read_gifti, requires=("nibabel",),
                          description="GIfTI surfaces (pointset + triangles; mm unless the metadata says)")]
