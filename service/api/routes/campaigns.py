"""Campaign policies as loaded, with the responsible-use notice."""

from __future__ import annotations

from fastapi import APIRouter

from service.api.deps import CatalogDep, ScorerKey
from service.api.openapi import error_responses
from service.api.routing import OrjsonRoute
from service.api.schemas import CampaignInfo, CampaignList
from service.scoring import Catalog

router = APIRouter(prefix="/v1/campaigns", tags=["campaigns"], route_class=OrjsonRoute)

NOTICE = (
    "Decisions are estimates with stated uncertainty, not advice; the people running a "
    "campaign stay responsible for it. Honour opt-outs, do-not-call registries, consent and "
    "marketing law where each customer lives, and do not target on protected attributes (or "
    "their proxies) where law forbids it (credit, insurance, housing, employment). In "
    "healthcare an uplift estimate is not a clinical decision: it needs clinical validation "
    "and whatever clearance local regulation requires, and defers to licensed practitioners. "
    "Political outreach follows local election law."
)


@router.get("", response_model=CampaignList, responses=error_responses(401, 403))
async def list_campaigns(catalog: CatalogDep, _: ScorerKey) -> CampaignList:
    """Every campaign of the campaign file, its policy and the model version serving it."""
    return CampaignList(notice=NOTICE, campaigns=describe_campaigns(catalog))


def describe_campaigns(catalog: Catalog) -> list[CampaignInfo]:
    """Public view of each campaign (no salt, no opt-out ids)."""
    serving = catalog.serving()
    out = []
    for cid, campaign in catalog.campaigns.items():
        version = serving[cid][1] if cid in serving else None
        out.append(
            CampaignInfo(
                name=cid,
                model=campaign.model,
                model_version=version,
                pinned=campaign.model_version is not None,
                policy_hash=campaign.hash,
                arms={arm.name: arm.cost for arm in campaign.arms},
                value=campaign.value,
                exploration=campaign.exploration,
                holdout=campaign.holdout,
                capacity=campaign.capacity,
                confidence=campaign.confidence,
                dnc_margin=campaign.dnc_margin,
                suppressed=len(campaign.suppression),
                ready=cid in catalog.bound,  # pilots serve without a model version
                problem=catalog.problems.get(cid),
            )
        )
    return out
