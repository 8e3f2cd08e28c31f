"""Dask integration: the same batch code on a dask.dataframe partitioned by series id.

::

    fit_dask(ddf, id="id", x="x", y="y", weight=None, *, model=ModelSpec(),
             options=FitOptions(), presorted=False) -> dask.dataframe.DataFrame

Each partition is fitted by :func:`service.core.batch.frames.fit_frame`, so a
series must lie in one partition. Unless ``presorted`` says it already does,
the frame is shuffled on ``id`` first; a running row number taken before the
shuffle restores the order of the points inside each series (Durbin-Watson
reads the points in order). The result has one row per series, grouped by
partition (not in input order); sort by id to compare. Runs on any Dask
scheduler, including ``dask.distributed`` clusters: the workers need
Curvewise installed, nothing else.
"""

from __future__ import annotations

import pandas as pd

from service.core.batch.frames import fit_frame
from service.core.spec import FitOptions, ModelSpec

_SEQ = "__curvewise_row"
_MODEL = ModelSpec()
_OPTIONS = FitOptions()


def _fit_partition(part: pd.DataFrame, *, id, x, y, weight, model, options,  # noqa: A002
                   ordered: bool) -> pd.DataFrame:
    if ordered and len(part):
        part = part.sort_values(_SEQ, kind="stable")
    return fit_frame(part, id=id, x=x, y=y, weight=weight, model=model, options=options)


def fit_dask(ddf, id: str = "id", x: str = "x", y: str = "y",  # noqa: A002
             weight: str | None = None, *, model: ModelSpec = _MODEL,
             options: FitOptions = _OPTIONS, presorted: bool = False):
    """Fit one curve (any family the model names) per ``id`` of a dask DataFrame; lazy, one
    result row per series.

    Parameters
    ----------
    ddf : dask.dataframe.DataFrame
        Long format: columns ``id``, ``x``, ``y`` (and ``weight``).
    presorted : bool
        True when every series already lies in one partition, in point order
        (e.g. written that way); skips the shuffle.

    Returns
    -------
    dask.dataframe.DataFrame
        Same columns as :func:`service.core.batch.frames.fit_frame`; call ``.compute()``.
    """
    columns = [id, x, y] + ([weight] if weight else [])
    ddf = ddf[columns]
    ordered = not presorted
    if ordered:
        ddf = ddf.assign(**{_SEQ: 1})
        ddf = ddf.assign(**{_SEQ: ddf[_SEQ].cumsum()})
        ddf = ddf.shuffle(on=id)
    meta = fit_frame(ddf._meta, id=id, x=x, y=y, weight=weight, model=model, options=options)
    return ddf.map_partitions(_fit_partition, id=id, x=x, y=y, weight=weight, model=model,
                              options=options, ordered=ordered, meta=meta)
