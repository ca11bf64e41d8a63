"""``searcher data``: look at a dataset, or write the demo scenario as NPZ files."""
from __future__ import annotations

import argparse
import copy
import importlib.resources
import json
import warnings

import yaml

__all__ = ["register"]

EXPORT_HELP = """Writes one NPZ file per graph, graph_0000.npz, ... in the --out folder:
  pos                 [N, 3] probe positions (world frame, not centred)
  velocity            [N, 3]     vector
  pressure            [N]        scalar
  pressure_gradient   [N, 3]     vector
  strain_rate         [N, 3, 3]  traceless symmetric tensor
  vorticity           [N, 3]     axial vector
  anisotropy          [N, 3, 3]  traceless symmetric tensor (the target)
  header              JSON string: field name -> {kind, role, level}
The reader also accepts [N, 2] positions/vectors (2D, z = 0), [N, 9] / [N, 6] tensors and
an optional edge_index [2, E] (row 0 source, row 1 destination), used with task.mesh_edges.
"""


def _inspect_help() -> str:
    from searcher.spec import FIELD_KINDS

    kinds = "\n".join(f"  {kind:<28}{irreps}" for kind, irreps in FIELD_KINDS.items())
    return ("field kinds (task.fields.<name>.kind) and their irreps:\n" + kinds + """
file data:
  .npz   one graph per file: pos [N, 3], one Cartesian array per field, optional
         edge_index [2, E] and a JSON header (see `searcher data export --help`)
  .vtu/.vtk (read with meshio): point_data arrays are node fields, field_data arrays
         graph fields; task.fields must declare their kinds; with task.mesh_edges the edges
         join every pair of vertices that share a cell
  a folder is one dataset: its data files in name order, one graph each
SOURCE may also be a study file: its task section (and its task.source) is inspected.
""")


def register(subparsers) -> None:
    parser = subparsers.add_parser(
        "data", help="inspect a dataset or export the demo flows",
        description="Inspect a dataset or export the demo flows.",
        formatter_class=argparse.RawDescriptionHelpFormatter,
        epilog="examples:\n"
               "  searcher data inspect studies/demo.yaml       the demo study's data\n"
               "  searcher data inspect demo                    the built-in demo defaults\n"
               "  searcher data inspect runs/flows/ --study my.yaml --json\n"
               "  searcher data export demo --graphs 8 --seed 1 --out demo-npz/")
    sub = parser.add_subparsers(dest="data_command", metavar="ACTION", required=True)
    ins = sub.add_parser("inspect", help="fields, kinds, irreps, graph stats and split sizes",
                         epilog=_inspect_help(),
                         formatter_class=argparse.RawDescriptionHelpFormatter)
    ins.add_argument("source", help="a study file (.yaml: its data), 'demo' (the built-in "
                     "defaults), a data file (.npz/.vtu/.vtk) or a folder")
    ins.add_argument("--study", help="study YAML whose task section (graph rule, fields, "
                     "splits) applies")
    ins.add_argument("--json", action="store_true", help="print one JSON object")
    ins.set_defaults(handler=_inspect)
    exp = sub.add_parser("export", help="write demo graphs as NPZ files", epilog=EXPORT_HELP,
                         formatter_class=argparse.RawDescriptionHelpFormatter)
    exp.add_argument("source", choices=["demo"], help="only the demo scenario can be exported")
    exp.add_argument("--graphs", type=int, default=8, help="number of flow samples (default 8)")
    exp.add_argument("--seed", type=int, default=0, help="generator seed (default 0)")
    exp.add_argument("--study", help="study YAML whose task.demo settings apply")
    exp.add_argument("--out", required=True, metavar="FOLDER", help="output folder")
    exp.set_defaults(handler=_export)


def _task(args) -> dict:
    if args.source.endswith((".yaml", ".yml")) and not args.study:  # a study: its own data
        from searcher.spec import load_study

        task = copy.deepcopy(load_study(args.source).fixed()["task"])
        args.study, args.source = args.source, task["source"]
        return task
    if args.study:
        from searcher.spec import load_study

        task = copy.deepcopy(load_study(args.study).fixed()["task"])
    else:
        text = importlib.resources.files("searcher.spec").joinpath("defaults.yaml").read_text()
        task = yaml.safe_load(text)["task"]
    task["source"] = args.source
    return task


def _inspect(args) -> int:
    from searcher.data import build_dataset, describe_fields, long_edges, survey_dataset

    task = _task(args)
    patched = task["source"] != "demo" and int((task.get("patches") or {}).get("size", 0)) > 0
    study = None
    if args.study:   # the study's radial cutoff is checked against the data's edges
        from searcher.spec import load_study

        study = load_study(args.study)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        if patched:   # large files: summed up one patch at a time, no graph kept
            digest, stats = survey_dataset(task, study)
        else:
            ds = build_dataset(task)
            digest, stats = ds.hash, ds.stats
            if study is not None:
                stats = dict(stats, long_edges=long_edges(study, ds.graphs))
    fields = describe_fields(task)
    report = {"source": args.source, "hash": digest,
              "fields": [f.to_dict() for f in fields.values()], "stats": stats,
              "warnings": sorted({str(w.message) for w in caught if "searcher" in w.filename})}
    if args.json:
        print(json.dumps(report, indent=2))
        return 0
    print(f"source  {args.source}   data hash {digest[:12]}")
    print(f"{'field':<22}{'kind':<28}{'irreps':<10}{'role':<8}level")
    for f in fields.values():
        print(f"{f.name:<22}{f.kind:<28}{f.irreps:<10}{f.role:<8}{f.level}")
    s, g = stats, stats["graphs"]
    print(f"samples {s['samples']}  graphs {g['graphs']}  nodes/graph {g['nodes_mean']:.1f} "
          f"[{g['nodes_min']}, {g['nodes_max']}]  edges/graph {g['edges_mean']:.1f} "
          f"[{g['edges_min']}, {g['edges_max']}]")
    print(f"degree mean {g['degree_mean']:.2f}, max {g['degree_max']}; isolated nodes "
          f"{g['isolated_nodes']}; edges dropped by cap {s['edges_dropped']}; longest edge "
          f"{g['edge_len_max']:.4g}")
    long = s.get("long_edges")
    if long:
        units = " mean local lengths" if long["scale"] == "local" else ""
        print(f"cutoff  {long['edges_over']} of {long['edges']} edges longer than the least "
              f"model.radial.cutoff {long['cutoff']:g}{units} (longest {long['longest']:.4g})")
    elif "long_edges" in s:
        print("cutoff  not checked (from_data, derived, or a searched radial scale)")
    print("split   " + "  ".join(f"{k} {v}" for k, v in s["split"].items())
          + f"   (by {s.get('split_by', 'sample')})")
    cases = s.get("cases", {})
    if cases and s.get("split_by") == "case" or any(v == "unseen_family" for v in cases.values()):
        print("cases   " + "  ".join(f"{c}: {p}" for c, p in cases.items()))
    if "patches" in s:
        p = s["patches"]
        print(f"patches {p['patches']} from {p['files']} file(s), {p['files_cut']} cut; core "
              f"nodes/patch {p['core_nodes_mean']:.1f} (max {p['core_nodes_max']}), halo "
              f"{p['halo_nodes_mean']:.1f}; every node core exactly once: "
              f"{'yes' if p['core_cover_exact'] else 'NO'}")
    print("stress  " + ("  ".join(f"{k} {v}" for k, v in s["stress"].items()) or "none"))
    for line in s["stress_notes"] + report["warnings"]:
        print(f"note    {line}")
    if args.source == "demo" and not args.study:
        print("note    these are the built-in demo settings (defaults.yaml), not a study's; "
              "name a study file to see its data: searcher data inspect studies/demo.yaml")
    return 0


def _export(args) -> int:
    from searcher.data import demo_samples, describe_fields, write_npz
    from searcher.errors import UserError, ensure_folder

    if args.graphs < 1:
        raise UserError.single(f"must be at least 1, but got {args.graphs}", path="--graphs")
    if args.seed < 0:  # numpy's generators take no negative seed
        raise UserError.single(f"must be at least 0, but got {args.seed}", path="--seed")
    ensure_folder(args.out, "--out")
    task = _task(args)
    task["demo"].update(samples=args.graphs, seed=args.seed)
    paths = write_npz(args.out, demo_samples(task["demo"]), describe_fields(task))
    print(f"wrote {len(paths)} files to {args.out}")
    return 0
