# Copyright 2026 The helpaware_node authors
#
# Licensed under the Apache License, Version 2.0 (the "License");
# you may not use this file except in compliance with the License.
# You may obtain a copy of the License at
#
#     http://www.apache.org/licenses/LICENSE-2.0
#
# Unless required by applicable law or agreed to in writing, software
# distributed under the License is distributed on an "AS IS" BASIS,
# WITHOUT WARRANTIES OR CONDITIONS OF ANY KIND, either express or implied.
# See the License for the specific language governing permissions and
# limitations under the License.

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
