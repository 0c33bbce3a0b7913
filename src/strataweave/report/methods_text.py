"""The methods paragraph, generated from the parameters a run actually used, with its references."""

from __future__ import annotations

from typing import Any

from strataweave.report.formatting import format_value
from strataweave.report.methods_preprocessing import preprocessing_sentences
from strataweave.report.run_folder import not_run_name
from strataweave.report.wording import column_words, listing, words

REFERENCES: dict[str, str] = {
    "lee1999": "Lee DD, Seung HS. Learning the parts of objects by non-negative matrix factorization. "
               "Nature 1999;401:788-791.",
    "cai2011": "Cai D, He X, Han J, Huang TS. Graph regularized nonnegative matrix factorization for data "
               "representation. IEEE Trans Pattern Anal Mach Intell 2011;33:1548-1560.",
    "wang2014": "Wang B, Mezlini AM, Demir F, et al. Similarity network fusion for aggregating data types on a "
                "genomic scale. Nat Methods 2014;11:333-337.",
    "dong2011": "Dong W, Moses C, Li K. Efficient k-nearest neighbor graph construction for generic similarity "
                "measures. Proc 20th Int Conf World Wide Web 2011:577-586.",
    "monti2003": "Monti S, Tamayo P, Mesirov J, Golub T. Consensus clustering: a resampling-based method for "
                 "class discovery and visualization of gene expression microarray data. Mach Learn 2003;52:91-118.",
    "senbabaoglu2014": "Senbabaoglu Y, Michailidis G, Li JZ. Critical limitations of consensus clustering in class "
                       "discovery. Sci Rep 2014;4:6207.",
    "brunet2004": "Brunet JP, Tamayo P, Golub TR, Mesirov JP. Metagenes and molecular pattern discovery using "
                  "matrix factorization. Proc Natl Acad Sci USA 2004;101:4164-4169.",
    "luxburg2007": "von Luxburg U. A tutorial on spectral clustering. Stat Comput 2007;17:395-416.",
    "newman2006": "Newman MEJ. Modularity and community structure in networks. "
                  "Proc Natl Acad Sci USA 2006;103:8577-8582.",
    "anders2010": "Anders S, Huber W. Differential expression analysis for sequence count data. "
                  "Genome Biol 2010;11:R106.",
    "hubert1985": "Hubert L, Arabie P. Comparing partitions. J Classif 1985;2:193-218.",
    "strehl2002": "Strehl A, Ghosh J. Cluster ensembles: a knowledge reuse framework for combining multiple "
                  "partitions. J Mach Learn Res 2002;3:583-617.",
    "kaplan1958": "Kaplan EL, Meier P. Nonparametric estimation from incomplete observations. "
                  "J Am Stat Assoc 1958;53:457-481.",
    "cox1972": "Cox DR. Regression models and life-tables. J R Stat Soc Series B 1972;34:187-220.",
    "grambsch1994": "Grambsch PM, Therneau TM. Proportional hazards tests and diagnostics based on weighted "
                    "residuals. Biometrika 1994;81:515-526.",
    "royston2013": "Royston P, Parmar MKB. Restricted mean survival time: an alternative to the hazard ratio for "
                   "the design and analysis of randomized trials with a time-to-event outcome. "
                   "BMC Med Res Methodol 2013;13:152.",
    "benjamini1995": "Benjamini Y, Hochberg Y. Controlling the false discovery rate: a practical and powerful "
                     "approach to multiple testing. J R Stat Soc Series B 1995;57:289-300.",
    "mann1947": "Mann HB, Whitney DR. On a test of whether one of two random variables is stochastically larger "
                "than the other. Ann Math Stat 1947;18:50-60.",
    "kruskal1952": "Kruskal WH, Wallis WA. Use of ranks in one-criterion variance analysis. "
                   "J Am Stat Assoc 1952;47:583-621.",
}


PARTITION_WORDS = {  # candidate -> (name, how it was made)
    "joint_model": ("the joint factorisation's labels", " (k-means on the unit-length rows of the patient factor)"),
    "fused_graph": ("the spectral clustering of the {graph}", ""),
    "concatenation": ("the spectral clustering of the concatenated scaled modalities",
                      " (a k-nearest-neighbour graph, with the mean degree of the {graph}, of the normalised "
                      "profiles before any sign split, reduced to at most 50 principal components)"),
}


def _sampled_phrase(results: dict) -> str:
    """Where the consensus matrix was kept on a sample of a large cohort, say so (PAC never is)."""
    kept = results["selection"].get("consensus_patients")
    if kept is None or kept >= results["cohort"]["patients"]:
        return ""
    return (f" (on the consensus among a seeded sample of {kept} patients; the proportion of ambiguous "
            "clustering and the core patients over all pairs)")


def _partition_phrase(selection: dict, count: int, graph_name: str, cite) -> str:
    """Which candidate partition gave the subtypes, and the rule that chose it."""
    rows = {row["count"]: row for row in selection.get("partitions", [])}
    sources = [key for key in PARTITION_WORDS if f"agreement_{key}" in rows.get(count, {})]
    taken = rows.get(count, {}).get("source", "joint_model")
    if len(sources) < 2:
        return f"The subtypes were {''.join(PARTITION_WORDS[taken]).format(graph=graph_name)}."
    words = ", ".join("".join(PARTITION_WORDS[key]).format(graph=graph_name) for key in sources)
    return (f"At each count the subtypes were, among {words}, the partition that agreed best with the others "
            f"and with each modality's own spectral partition at that count (mean adjusted Rand "
            f"index; the median partition of a cluster ensemble{cite('strehl2002')}), and every "
            f"resample of that count repeated the kind of partition chosen; at the chosen count this was "
            f"{PARTITION_WORDS[taken][0].format(graph=graph_name)}.")


def _get(parameters: dict[str, Any], path: str) -> Any:
    value: Any = parameters
    for key in path.split("."):
        if not isinstance(value, dict) or key not in value:
            return None
        value = value[key]
    return value


def _phrase(template: str, **values: Any) -> str:
    """The template filled in, or '' when any value is missing (so unknown parameters are never invented)."""
    if any(v is None for v in values.values()):
        return ""
    return template.format(**{k: format_value(v) for k, v in values.items()})


def methods_paragraph(results: dict[str, Any], version: str | None = None) -> tuple[str, list[str]]:
    """A methods paragraph from results.json (and the strataweave `version` of the manifest) with the keys
    of the references it cites, in order."""
    p = results.get("parameters") or {}
    cited: list[str] = []

    def cite(*keys: str) -> str:
        for key in keys:
            if key not in cited:
                cited.append(key)
        return " [" + ", ".join(str(cited.index(key) + 1) for key in keys) + "]"

    modalities = results["cohort"]["modalities"]
    single = len(modalities) == 1
    names = ", ".join(f"{m['name']} ({m['kind']}, {m['patients']} patients)" for m in modalities)
    layers = "one omics layer" if single else f"{len(modalities)} omics layers"
    software = f"strataweave {version}" if version else "strataweave (version not recorded)"
    sentences = [f"{results['cohort']['patients']} patients were analysed"
                 + (f" with {layers}: {names}" if modalities else "") + f", using {software}."]
    sentences += preprocessing_sentences(p.get("modalities") or [], cite)
    if results.get("graph"):
        graph = results["graph"]
        kernel = _phrase(" with the {kernel} kernel", kernel=_words_or_none(_get(p, "graph.kernel")))
        metric = _phrase(" on {metric} distances", metric=_get(p, "graph.metric"))
        built = (f"a patient-similarity graph keeping {graph['neighbours']} neighbours per patient was built"
                 f"{kernel}{metric}{cite('wang2014')}")
        sentences.append(
            (f"From the one modality, {built}; " if single else
             f"Per modality, {built}, and the graphs were fused by the {_fusion_phrase(graph)}; ")
            + (f"{graph['fallback_patients']} patients left without an edge were linked to their nearest "
               "neighbours in the average graph." if graph["fallback_patients"] else
               "no patient was left without an edge.")
            + _search_phrase(graph, cite))
    if results.get("selection"):
        selection = results["selection"]
        restarts = _get(p, "factorization.n_restarts")
        settings = [_phrase("graph weight {w}", w=_get(p, "factorization.graph_weight")),
                    _phrase("{r} restart" + ("" if restarts == 1 else "s"), r=restarts)]
        settings_text = ", ".join(x for x in settings if x)
        weight = f" ({settings_text})" if settings_text else ""
        resamples = _phrase("{n} resamples of {f} of the patients", n=_get(p, "resampling.n_resamples"),
                            f=_get(p, "resampling.fraction")) or "resamples of the patients"
        window = _get(p, "subtypes.pac_window")
        pac = _phrase(" with window {lo}-{hi}", lo=window[0], hi=window[1]) if isinstance(window, list) else ""
        graph_name = "patient graph" if single else "fused graph"
        factorisation = (f"A non-negative matrix factorisation of the omics layer{cite('lee1999')} was" if single
                         else "A joint non-negative matrix factorisation shared one patient factor across modalities"
                         f"{cite('lee1999')} and was")
        start = (f" Each fit started from the spectral clustering of its own (resampled) {graph_name} at that count"
                 f"{cite('luxburg2007')}." if _get(p, "factorization.start_from") == "graph" else "")
        sentences.append(
            f"{factorisation} regularised by the {graph_name}{cite('cai2011')}{weight}.{start} "
            f"Subtype counts {format_value(selection['counts'])} were compared by consensus over {resamples}"
            f"{cite('monti2003')}, using the proportion of ambiguous clustering{pac}{cite('senbabaoglu2014')}, "
            f"the cophenetic correlation{cite('brunet2004')}{_sampled_phrase(results)}, "
            f"the eigengap of the {graph_name}{cite('luxburg2007')} "
            "and further criteria listed in the report.")
        sentences.append(_partition_phrase(selection, results["subtype_count"], graph_name, cite))
        sentences.append(_phrase("A patient was called core when its mean consensus with its own subtype across the "
                                 "resamples was at least {t}.", t=_get(p, "subtypes.core_threshold")))
        chosen = "fixed by the user" if selection.get("overridden") else "recommended"
        reason = selection["reason"].rstrip()
        sentences.append(f"{results['subtype_count']} subtypes were used ({chosen}). Reason: {reason}"
                         + ("" if reason.endswith(".") else "."))
    if results.get("baselines"):
        sentences.append("Agreement with baseline methods was measured by the adjusted Rand index"
                         f"{cite('hubert1985')} and normalised mutual information.")
    if results.get("survival"):
        permutations = _phrase(" and by {n} label permutations", n=results["survival"]["logrank"].get("permutations")
                               or _get(p, "evaluation.n_permutations"))
        covariates = _get(p, "evaluation.covariates")
        adjusted = f", adjusted for {listing([column_words(str(c)) for c in covariates])}" if covariates else ""
        sentences.append(
            f"Survival was summarised by Kaplan-Meier estimates{cite('kaplan1958')} and compared by the log-rank "
            f"test{permutations}; hazard ratios came from a Cox model{cite('cox1972')}{adjusted}, whose "
            "proportional-hazards assumption was checked by the global test on scaled Schoenfeld residuals"
            f"{cite('grambsch1994')} (rank of time, one degree of freedom per term)"
            + (f"; restricted mean survival times{cite('royston2013')} were computed up to "
               f"{format_value(results['survival']['rmst_horizon'])} {results['survival'].get('time_unit', '')}"
               .rstrip() if results["survival"].get("rmst_horizon") is not None else "") + ".")
    if results.get("clinical"):
        sentences.append("Clinical variables were compared between subtypes by chi-square or Fisher's exact tests "
                         f"and the Kruskal-Wallis test{cite('kruskal1952')}.")
    if results.get("markers"):
        if _get(p, "evaluation.marker_test") == "welch":
            test = "Welch's t-test"
        else:
            test = f"the Mann-Whitney U test{cite('mann1947')}"
        sentences.append(f"Markers of each subtype against the rest were ranked by {test} per feature.")
    if results.get("enrichment"):
        sentences.append("Over-representation of each subtype's markers in gene sets was tested with the "
                         "hypergeometric distribution, the universe being the measured features; a rank-based "
                         "competitive test compared the marker scores of each set's members with those of the other "
                         f"features by the Mann-Whitney U test{cite('mann1947')}.")
    if any(results.get(key) for key in ("clinical", "markers", "enrichment", "survival")):
        sentences.append(f"p-values were adjusted by the Benjamini-Hochberg procedure{cite('benjamini1995')}.")
    for name, reason in (results.get("not_run") or {}).items():
        sentences.append(f"{not_run_name(str(name))}: {reason}.")
    seed = _get(p, "seed")
    if seed is not None:
        sentences.append(f"All random draws derive from the seed {seed}.")
    return " ".join(s for s in sentences if s), cited


def _words_or_none(name: Any) -> str | None:
    return None if name is None else words(str(name))


def _search_phrase(graph: dict, cite) -> str:
    """' Neighbours were found approximately ...' when any modality's were; '' when all were exact."""
    searches = graph.get("neighbour_search") or {}
    approximate = [name for name, search in searches.items() if search == "approximate"]
    if not approximate:
        return ""
    others = ", exactly in the others" if len(approximate) < len(searches) else ""
    if graph.get("neighbour_search_requested") == "auto" and graph.get("approximate_above") is not None:
        rule = (f"the automatic rule searches approximately in a modality of more than "
                f"{format_value(graph['approximate_above'])} patients, exactly otherwise")
    else:
        rule = "as the workflow asked"
    return (f" Nearest neighbours were found approximately, by nearest-neighbour descent{cite('dong2011')} "
            f"(pynndescent, seeded from the run's seed), in {listing(approximate)}{others} ({rule}).")


def _fusion_phrase(graph: dict) -> str:
    """The fusion rule used, and how it was chosen when the data chose it."""
    rule = graph["rule"] + (f" rule with a quorum of {graph['quorum']}" if graph.get("quorum") else " rule")
    if graph.get("rule_requested") != "auto":
        return rule
    share = next((row["confirmed_share"] for row in graph.get("rule_evidence", []) if row.get("chosen")), None)
    confirmed = f" ({share:.0%} of its edge weight)" if isinstance(share, float) else ""
    return (f"{rule}, chosen from the data among the intersection, every quorum and the average as the graph "
            f"whose edges the modalities themselves confirm most{confirmed}")
