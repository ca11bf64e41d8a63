"""``survey_dataset``: the statistics of patched file data, one patch at a time.

``build_dataset`` keeps every graph, as training needs them.  To look at a large file cut
into patches (``searcher data inspect``), the survey cuts it with :func:`iter_cut`, sums up
each patch's graph (:func:`graph_stats` reads a generator) and its core cover
(:class:`PatchCensus`) and, given a study, its edges longer than the study's radial cutoff
(:func:`long_edge_counter`, the check ``run`` makes on the built graphs), and drops it:
the edges of one patch are held at a time, besides the file's positions and values and
one cKDTree of it.  Splits and cases follow the same
rules as ``build_dataset``; stress sets, which transform test graphs, are left to the run.
"""
from __future__ import annotations

from types import SimpleNamespace

from searcher.data._cases import check_hold_out, split_by_case
from searcher.data._dataset import _case_parts, data_hash, describe_fields
from searcher.data._files import read_samples
from searcher.data._graphs import graph_stats, long_edge_counter, to_data
from searcher.data._patches import PatchCensus, iter_cut
from searcher.errors import UserError

__all__ = ["survey_dataset", "STRESS_LATER"]

STRESS_LATER = ("stress sets are made when the study runs (this survey holds one patch at a "
                "time)")


def survey_dataset(task_cfg: dict, study=None) -> tuple[str, dict]:
    """Data hash and stats (the keys of ``Dataset.stats``) of a file source with
    ``task.patches.size > 0``, holding one patch's edges at a time.

    Args:
        task_cfg: the resolved ``task`` mapping.
        study: when given, ``stats["long_edges"]`` counts the edges of the graphs (kept
            patches, as ``run`` checks them) longer than the least cutoff its trials can
            take (:meth:`LongEdges.result`; None when nothing is checked), warned once.

    Raises:
        UserError: as ``build_dataset`` would (a patch without edges, an unknown hold-out
            case, fewer than 3 samples left).
    """
    fields = describe_fields(task_cfg)
    samples = read_samples(task_cfg, fields)
    hold = set(task_cfg["split"]["hold_out"])
    check_hold_out(hold, {s.family for s in samples}, task_cfg["source"])
    census = PatchCensus({s.source: len(s.pos) for s in samples})
    kept, held, dropped = [], [], [0]
    long = long_edge_counter(study) if study is not None else None

    def graphs():
        for piece in iter_cut(samples, task_cfg):
            census.add(piece)
            dropped[0] += int(piece.info["edges_dropped"])
            if piece.edge_index.shape[1] == 0:
                raise UserError.single(f"patch {piece.info['patch']} of {piece.source} has no "
                                       "edges at the chosen graph rule; raise "
                                       "task.graph.radius", file=piece.source,
                                       path="task.graph.radius")
            label = SimpleNamespace(family=piece.family)
            if piece.family in hold:
                held.append(label)
                continue
            kept.append(label)
            graph = to_data(piece.pos, piece.edge_index, {}, piece.family, piece.sample)
            if long is not None:
                long.add(graph)
            yield graph

    stats_graphs = graph_stats(graphs())
    if len(kept) < 3:
        raise UserError.single(f"only {len(kept)} samples remain after hold_out (rule: at least "
                               "3, one each for train, val and test)", file=str(task_cfg["source"]),
                               path="task.split.hold_out" if held else "task.source")
    split, split_by = split_by_case([s.family for s in kept], task_cfg["split"],
                                    task_cfg["source"])
    patches = census.result()
    patches.update(files=len(samples), size=int(task_cfg["patches"]["size"]),
                   halo=int(task_cfg["patches"].get("halo", 0)))
    stats = {"samples": patches["patches"], "graphs": stats_graphs,
             "split": {k: len(v) for k, v in split.items()}, "stress": {},
             "stress_notes": [STRESS_LATER], "families": sorted({s.family for s in kept}),
             "held_out": sorted({s.family for s in held}), "split_by": split_by,
             "patches": patches, "cases": _case_parts(kept, split, held),
             "edges_dropped": dropped[0], "realizability_scaled": 0}
    if study is not None:
        stats["long_edges"] = long.result() if long is not None else None
        if long is not None:
            long.warn()
    return data_hash(task_cfg), stats
