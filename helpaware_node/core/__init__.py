"""The pure core: willingness belief, context, site model and the decision. No ROS here."""
from .belief import (
                     Belief,
                     declined_ab,
                     declined_moments,
                     forget,
                     predictive_help,
                     update_declined,
                     update_helped,
                     update_no_response,
)
from .context import ask_load, context_factor
from .model import CoreInputError, DecisionConfig, params_hash, SiteModel
from .person import (
                     apply_event,
                     belief_at,
                     fold_events,
                     keep_recent_asks,
                     note_ask,
                     note_candidate,
                     note_outcome,
                     OutcomeEvent,
                     PersonRecord,
                     Result,
)
from .policy import (
                     Candidate,
                     candidate_from_record,
                     choose_lookahead,
                     conclude,
                     decide,
                     Decision,
                     evaluate,
                     Evaluation,
                     Exclusion,
                     HelpNeed,
                     information_value,
)

__all__ = ["Belief", "declined_ab", "declined_moments", "forget", "predictive_help",
           "update_declined", "update_helped", "update_no_response", "ask_load", "context_factor",
           "CoreInputError", "DecisionConfig", "SiteModel", "params_hash", "OutcomeEvent",
           "PersonRecord", "Result", "apply_event", "belief_at", "fold_events", "keep_recent_asks",
           "note_ask", "note_candidate", "note_outcome", "Candidate", "Decision", "Evaluation",
           "Exclusion", "HelpNeed", "candidate_from_record", "choose_lookahead", "conclude",
           "decide", "evaluate", "information_value"]
