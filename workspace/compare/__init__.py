"""Membership comparison: pure numerics (numpy / scipy only).

Scores (ARI, NMI, AMI, VI) from an exact contingency table, Hungarian
matching of communities, community events, node-set alignment across network
versions, moved nodes, and tracking over a chain of runs.

Special labels: -1 marks a node its run left unassigned (an ordinary group
for the scores, never matched, no events); -2 is used internally for a node
absent from one side when comparing with ``nodes="all"``. In JSON output they
appear as the strings ``"unassigned"`` and ``"absent"``.
"""

from workspace.compare.alignment import NodeAlignment, align_nodes
from workspace.compare.contingency import ABSENT, UNASSIGNED, ContingencyTable, contingency_table
from workspace.compare.diff import (
    NO_MATCH, CommunityThread, MembershipDiff, TrackResult, compare_memberships,
    track_memberships,
)
from workspace.compare.events import (
    EVENT_KINDS, CommunityEvent, EventThresholds, community_events, label_to_json,
)
from workspace.compare.matching import CommunityMatch, match_communities
from workspace.compare.scores import (
    NORMALIZATIONS, adjusted_mutual_info, adjusted_rand_index, entropies,
    expected_mutual_information, generalized_mean, mutual_information, normalized_mutual_info,
    variation_of_information,
)

__all__ = [
    "ABSENT", "UNASSIGNED", "NO_MATCH", "NORMALIZATIONS", "EVENT_KINDS",
    "ContingencyTable", "contingency_table",
    "adjusted_rand_index", "normalized_mutual_info", "adjusted_mutual_info",
    "expected_mutual_information", "mutual_information", "entropies", "generalized_mean",
    "variation_of_information",
    "CommunityMatch", "match_communities",
    "EventThresholds", "CommunityEvent", "community_events", "label_to_json",
    "NodeAlignment", "align_nodes",
    "MembershipDiff", "compare_memberships",
    "CommunityThread", "TrackResult", "track_memberships",
]
