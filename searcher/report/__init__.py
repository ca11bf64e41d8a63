"""The evidence dossier: finalist re-training, statistics, plots, writers and model export.

Example::

    from searcher.spec import load_study
    content = make_dossier(load_study("studies/demo.yaml"), quick=True)
    content["pick"]["decision"]
"""
from searcher.report._cautions import CAUTIONS, cautions_for
from searcher.report._content import FORMAT, assemble, summarise_finalist
from searcher.report._dossier import QUICK, dossier_settings, make_dossier
from searcher.report._export import choice_study, export_choice, load_model, normaliser_path
from searcher.report._finalists import BASELINES, Candidate, choose_finalists
from searcher.report._pick import decide, paired_errors
from searcher.report._plots import PLOTS, render_plots
from searcher.report._provenance import git_commit, now_utc, package_versions, provenance
from searcher.report._finalist_measure import headline_error, inference_ms_per_1k_nodes, measure, retrain
from searcher.report._sections import SECTION_TITLES, fmt, sections
from searcher.report._stats import (BCA_MIN_SEEDS, WEAK_TRANSFER, Interval, Outperform,
                                    RankStability, Transfer, kendall_w, p_outperform,
                                    rank_stability, seed_interval, transfer)
from searcher.report._tracking import RERUN_ROLE, DossierTracker
from searcher.report._writers import (FILES, html_page, json_text, markdown_text, plot_files,
                                      write_dossier)

__all__ = [
    "BASELINES", "BCA_MIN_SEEDS", "CAUTIONS", "Candidate", "DossierTracker", "FILES", "FORMAT",
    "Interval", "Outperform", "PLOTS", "QUICK", "RERUN_ROLE", "RankStability",
    "SECTION_TITLES", "Transfer", "WEAK_TRANSFER", "assemble", "cautions_for", "choice_study",
    "choose_finalists", "decide", "dossier_settings", "export_choice", "fmt", "git_commit",
    "headline_error", "html_page", "inference_ms_per_1k_nodes", "json_text", "kendall_w",
    "load_model", "make_dossier", "markdown_text", "measure", "normaliser_path", "now_utc",
    "p_outperform", "package_versions", "paired_errors", "plot_files", "provenance",
    "rank_stability", "render_plots", "retrain", "sections", "seed_interval",
    "summarise_finalist", "transfer", "write_dossier",
]
