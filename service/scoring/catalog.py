"""Campaigns bound to the verified model versions that score them.

A :class:`Catalog` is an immutable snapshot: the campaigns of the campaign file, the
model each one is scored with (loaded through the registry, which verifies every hash
before unpickling), and what went wrong for those that cannot be served. Reloading
builds a new snapshot and swaps it in whole, so a request never sees half a reload.
"""

from __future__ import annotations

import logging
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import numpy.typing as npt

from service.decisions import DecisionLog
from service.errors import BundleError, NotFoundError, PolicyError
from service.policy import PILOT_MODEL, Campaign, load_campaigns
from service.registry import LoadedBundle, ModelRegistry
from service.scoring.estimates import ServableModel, load_servable
from service.scoring.features import FeatureSchema
from service.scoring.pilot import OpenSchema, PilotModel

__all__ = [
    "BoundCampaign",
    "Catalog",
    "CatalogRefused",
    "bind_campaigns",
    "catalog_problems",
    "load_catalog",
    "readiness_problems",
    "validated_catalog",
]

logger = logging.getLogger(__name__)


class CatalogRefused(PolicyError):
    """A campaign file that cannot serve every campaign; ``details`` lists the problems."""

    def __init__(self, campaigns_file: Path, problems: list[str]) -> None:
        more = f" (and {len(problems) - 1} more)" if len(problems) > 1 else ""
        super().__init__(
            f"The campaign file {str(campaigns_file)!r} was not applied: {problems[0]}{more}. "
            "The previous campaigns keep serving; fix the file or the registry and reload."
        )
        self.details = {"problems": problems}


@dataclass(frozen=True, eq=False)
class BoundCampaign:
    """A campaign together with the verified model version that scores it."""

    campaign: Campaign
    bundle: LoadedBundle
    model: ServableModel
    schema: FeatureSchema
    arm_columns: npt.NDArray[np.intp]
    outcome_type: str
    arm_index: list[int] = field(init=False)
    cost_list: list[float] = field(init=False)
    labels: tuple[str, ...] = field(init=False)
    model_ref: dict[str, str] = field(init=False)

    def __post_init__(self) -> None:
        # Plain-Python copies for the single-customer path, which avoids NumPy.
        object.__setattr__(self, "arm_index", self.arm_columns.tolist())
        object.__setattr__(self, "cost_list", self.campaign.costs.tolist())
        object.__setattr__(self, "labels", self.campaign.action_labels())
        object.__setattr__(
            self, "model_ref", {"name": self.bundle.name, "version": self.bundle.version}
        )


@dataclass(frozen=True)
class Catalog:
    """Campaigns by id, the ones that can be served, and why the others cannot."""

    campaigns: Mapping[str, Campaign]
    bound: Mapping[str, BoundCampaign]
    problems: Mapping[str, str] = field(default_factory=dict)

    def get(self, campaign_id: str) -> BoundCampaign:
        """The served campaign ``campaign_id``.

        Raises
        ------
        NotFoundError
            No such campaign in the campaign file.
        BundleError
            The campaign exists but its model could not be loaded and verified.
        """
        bound = self.bound.get(campaign_id)
        if bound is not None:
            return bound
        if campaign_id not in self.campaigns:
            raise NotFoundError(
                f"Campaign {campaign_id!r} is not in the campaign file; known campaigns are "
                f"{sorted(self.campaigns)}."
            )
        raise BundleError(
            f"Campaign {campaign_id!r} cannot be scored: {self.problems[campaign_id]}"
        )

    def serving(self) -> dict[str, tuple[str, str]]:
        """Campaign -> (model name, version) for every served campaign (pilots have none)."""
        return {
            cid: (b.bundle.name, b.bundle.version)
            for cid, b in self.bound.items()
            if not b.campaign.is_pilot
        }

    def forms(self) -> dict[str, str]:
        """Campaign -> the form that scores it (``"compact"`` or ``"full"``)."""
        return {cid: b.model.form for cid, b in self.bound.items()}


_Loaded = tuple[LoadedBundle, ServableModel, FeatureSchema]


def load_catalog(
    registry: ModelRegistry,
    campaigns_file: Path,
    *,
    compile: bool = True,
    previous: Catalog | None = None,
    form: str = "compact",
) -> Catalog:
    """Load the campaign file and bind each campaign to its model version (served in
    its compact form when it has one and ``form="compact"``).

    Raises
    ------
    PolicyError
        The campaign file itself is invalid (the message names the campaign and key).
    """
    campaigns = load_campaigns(campaigns_file)
    return bind_campaigns(registry, campaigns, compile=compile, previous=previous, form=form)


def bind_campaigns(
    registry: ModelRegistry,
    campaigns: Mapping[str, Campaign],
    *,
    compile: bool = True,
    previous: Catalog | None = None,
    form: str = "compact",
) -> Catalog:
    """Bind campaigns to their current model versions (champion unless pinned).

    A campaign whose model is missing or fails verification is recorded in
    ``problems`` instead, so the others still serve and ``/readyz`` reports the failure.
    Models already loaded by ``previous`` are reused rather than loaded again.
    """
    cache: dict[tuple[str, str], _Loaded] = {}
    if previous is not None:
        for b in previous.bound.values():
            if b.campaign.is_pilot:
                continue
            cache[(b.bundle.name, b.bundle.version)] = (b.bundle, b.model, b.schema)
    bound: dict[str, BoundCampaign] = {}
    problems: dict[str, str] = {}
    for cid, campaign in campaigns.items():
        try:
            bound[cid] = _bind(registry, campaign, cache, compile, form)
        except (NotFoundError, BundleError, PolicyError) as err:
            problems[cid] = str(err)
            logger.error("campaign %s cannot be served: %s", cid, err)
    return Catalog(dict(campaigns), bound, problems)


def _bind(
    registry: ModelRegistry,
    campaign: Campaign,
    cache: dict[tuple[str, str], _Loaded],
    compile: bool,
    form: str,
) -> BoundCampaign:
    if campaign.model is None:
        return _pilot(campaign)
    version = registry.resolve(campaign.model, campaign.model_version)
    key = (campaign.model, version)
    if key not in cache:
        bundle, model = load_servable(registry, *key, form=form, compile=compile)
        cache[key] = (bundle, model, FeatureSchema.from_manifest(bundle.manifest["features"]))
    bundle, model, schema = cache[key]
    arms = [str(a) for a in bundle.manifest["arms"]]
    return BoundCampaign(
        campaign=campaign,
        bundle=bundle,
        model=model,
        schema=schema,
        arm_columns=campaign.arm_columns(arms),
        outcome_type=str(bundle.manifest.get("outcome_type", "binary")),
    )


def _pilot(campaign: Campaign) -> BoundCampaign:
    # A randomized pilot has no model: open features, zero estimates, logged as "pilot".
    name, version = PILOT_MODEL
    arms = list(campaign.arm_names)
    manifest = {"features": [], "arms": arms, "outcome_type": "unknown"}
    return BoundCampaign(
        campaign=campaign,
        bundle=LoadedBundle(name, version, Path(), manifest, None),
        model=PilotModel(len(arms)),
        schema=OpenSchema(),
        arm_columns=np.arange(len(arms), dtype=np.intp),
        outcome_type="unknown",
    )


def validated_catalog(
    registry: ModelRegistry,
    campaigns_file: Path,
    *,
    compile: bool = True,
    previous: Catalog | None = None,
    form: str = "compact",
) -> Catalog:
    """Load the campaign file for a reload, refusing it unless every campaign can serve.

    The check is :func:`catalog_problems`, the one ``/readyz`` runs, so a reload that
    succeeds leaves the service ready and one that fails changes nothing.

    Raises
    ------
    PolicyError
        The file is invalid, or a campaign's model is missing or fails verification;
        ``details["problems"]`` lists every problem.
    """
    catalog = load_catalog(registry, campaigns_file, compile=compile, previous=previous, form=form)
    problems = catalog_problems(catalog, registry)
    if problems:
        raise CatalogRefused(campaigns_file, problems)
    return catalog


def catalog_problems(catalog: Catalog, registry: ModelRegistry) -> list[str]:
    """Why a catalog cannot serve every campaign (empty when it can).

    Every served model version is verified again on disk (hashes of every artifact), so a
    bundle that was removed or altered since it was loaded counts as a problem.
    """
    problems = [f"campaign {cid!r}: {problem}" for cid, problem in catalog.problems.items()]
    if not catalog.campaigns:
        problems.append("the campaign file declares no campaign")
    for name, version in sorted(set(catalog.serving().values())):
        try:
            registry.verify(name, version)
        except (BundleError, NotFoundError) as err:
            problems.append(f"model {name}:{version} failed verification: {err}")
    return problems


def readiness_problems(catalog: Catalog, registry: ModelRegistry, log: DecisionLog) -> list[str]:
    """Why the service should not take traffic (empty when ready).

    The catalog's problems (:func:`catalog_problems`, which also verifies every served
    model on disk) and a decision log that does not take writes.
    """
    problems = catalog_problems(catalog, registry)
    if not log.writable():
        problems.append(
            "the decision log is not writable; check the disk and the permissions of its file"
        )
    return problems
