"""The cautions every page shows, and those of the review across releases."""

from __future__ import annotations

__all__ = ["REVIEW_CAUTIONS", "STANDING_CAUTIONS", "caution_lines"]

#: on every page: sample sizes, multiple testing, settings, causes, fairness, policy
STANDING_CAUTIONS = (
    "**Sample sizes.** Every estimate on this page comes from a finite sample; small "
    "regions have wide intervals, and a region's rate can move a lot between samples.",
    "**Multiple testing.** Many candidate regions were searched for; findings are "
    "controlled for the false discovery rate (Benjamini–Hochberg) across all candidates "
    "tested, which limits, but does not remove, the chance that a finding is spurious.",
    "**Settings dependence.** A Mapper graph depends on its filter function, cover and "
    "clusterer. The stability section shows how often each weak region is found again "
    "under other settings and subsamples; a region found rarely is a weak lead.",
    "**Regions are not causes.** A region describes where errors concentrate, in terms "
    "of the features; it does not say why, and the surrogate rules are approximations.",
    "**Not a fairness certification.** This audit does not test any fairness criterion "
    "and does not show that a model treats any group fairly.",
    "**Policy.** These findings inform, and do not replace, the review that your "
    "organisation's model-risk policy and the regulation that applies require.",
)

#: on the pages that compare releases (the comparison pages, ``diff`` and ``gate``)
REVIEW_CAUTIONS = (
    "**Followed regions.** A tracked id says that two releases' weak regions share most of "
    "their rows (Jaccard index at least the configured threshold), not that the same cause "
    "is at work in both.",
    "**Fates are tests.** Fixed, still weak and worse are one-sided tests on a finite "
    "sample, adjusted across the regions of one step; a region with few rows can be "
    "neither shown fixed nor shown still weak.",
    "**New rows.** When a release is validated on other rows than the one before, its "
    "changes mix the model's changes with the population's (see the shift of each "
    "region); regions are followed through the place of the new rows on the earlier "
    "graph, an approximation.",
)


def caution_lines(heading: str = "##", *, review: bool = False) -> list[str]:
    """A Markdown cautions section: the review's cautions (when ``review``), then the
    standing ones."""
    items = (*(REVIEW_CAUTIONS if review else ()), *STANDING_CAUTIONS)
    return [f"{heading} Cautions", "", *(f"- {c}" for c in items), ""]
