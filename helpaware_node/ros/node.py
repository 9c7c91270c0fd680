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

"""The decision node: people, help needs and outcomes in; decisions, markers, diagnostics out.

Topics (relative names, so namespaces and remaps work; the fleet and privacy topics are
site-wide, absolute by default: parameters fleet_topic and privacy_topic):
  in  people       std_msgs/String (wire `people`), sensor-data QoS (best effort, depth 5)
  in  task_status  std_msgs/String (wire `task_status`), reliable, depth 1000
  in  outcome      std_msgs/String (wire `outcome`), reliable, depth 1000
  in  <navigation_status_topic> action_msgs/GoalStatusArray (when the parameter is set)
  out decision     std_msgs/String (wire `decision`), reliable, depth 50
  out markers      visualization_msgs/MarkerArray
  out /diagnostics diagnostic_msgs/DiagnosticArray, about 1 Hz
  in+out <fleet_topic> (default /helpaware/fleet) signed fleet documents (ros/fleet.py)
  in  <privacy_topic> (default /helpaware/privacy_request) signed requests (ros/privacy.py)
Wiring only: messages become events of the help session (helpaware_node/session: needs, asks,
limits, every decision through core.policy.decide); its Steps come back as documents, fleet
events and log lines. Site learning (site_learning.py) refits the site constants in a worker
process (a thread where none can start); the housekeeping timer puts a new revision in force.
Beside this file: input_handlers.py (the input topics: count, decode, hand to the session,
refusals), step_output.py (a Step's decisions published, events shared, notes logged),
status_publisher.py (/diagnostics and markers), housekeeping.py (the timer's retries, refits
and ticks; store-job reports), node_entities.py (publishers, subscriptions, timers, QoS: made
and destroyed), fleet.py, store_retry.py, diagnostics.py, markers.py, site_learning.py.
"""
from __future__ import annotations

import sys
import time
from typing import Any, Optional

import rclpy
from rclpy._rclpy_pybind11 import RCLError
from rclpy.clock import ROSClock
from rclpy.executors import ExternalShutdownException, SingleThreadedExecutor
from rclpy.lifecycle import LifecycleNode, LifecycleState, TransitionCallbackReturn
from rclpy.publisher import Publisher

from . import diagnostics as diag
from .fleet import FleetLink, PrivacyRequests
from .housekeeping import Housekeeping
from .input_handlers import InputHandlers
from .markers import PersonMarkers
from .node_entities import create_entities, destroy_entities
from .params import model_ranges, NodeParameters
from .refusal_log import LogThrottle
from .shm_files import StartupSweep
from .site_learning import NodeLearning, proposal_path
from .status_publisher import StatusPublisher
from .step_output import StepOutput
from .store_retry import HeldOutcomes
from ..core import params_hash
from ..core.model import CoreInputError
from ..session import HelpSession, StoreStatus
from ..store import default_store_path, open_store
from ..store.base import BeliefStore
from ..store.jobs import StoreJobs

NODE_NAME = "helpaware_decider"
MEMORY_STORE = "memory"   # store_path value for a store that lives only in this process


class StartupError(RuntimeError):
    """The node cannot start (refused parameters, store unavailable)."""


class HelpAwareNode(LifecycleNode):
    """Decides at each help need whether to ask a nearby person, and whom."""

    # made at configure by node_entities.create_entities
    decision_pub: Publisher
    marker_pub: Publisher
    diag_pub: Publisher
    input_watch: diag.WatchedInputs
    fleet: FleetLink
    privacy: PrivacyRequests

    def __init__(self, node_name: str = NODE_NAME, **kwargs) -> None:
        try:
            super().__init__(node_name, **kwargs)
        except rclpy.exceptions.ParameterException as exc:   # e.g. use_sim_time: 1 in a file
            raise StartupError(f"parameters refused: {exc}") from exc
        self.store: Optional[BeliefStore] = None
        self._session: Optional[HelpSession] = None   # made at configure, with the store
        self.held: Optional[HeldOutcomes] = None
        self.learning: Optional[NodeLearning] = None  # site learning, made at configure
        self.store_jobs: Optional[StoreJobs] = None   # forget/opt-out/compaction off the executor
        # messages in, Steps out, status out: each side a module of its own (see above)
        self.inputs = InputHandlers(self)
        self._on_people, self._on_task_status = self.inputs.people, self.inputs.task_status
        self._on_outcome = self.inputs.outcome
        self._on_navigation_status = self.inputs.navigation_status
        self.output = StepOutput(self)
        self._apply = self.output.apply
        self._publish_status = StatusPublisher(self).publish
        self.upkeep = Housekeeping(self)
        self._housekeeping, self._on_store_jobs = self.upkeep.run, self.upkeep.store_jobs_done
        try:
            self.params = NodeParameters(self, on_change=self._on_parameters_changed)
        except (CoreInputError, rclpy.exceptions.ParameterException) as exc:
            raise StartupError(f"parameters refused: {exc}") from exc
        self.counters = diag.InputCounters()
        self.markers = PersonMarkers()
        self.side_refusals = diag.SideRefusals()
        self.log_lines = LogThrottle()      # per-document lines: by kind, bounded (diagnostics)
        self._active = False
        self._entities: list[Any] = []   # timers, publishers, subscriptions
        self._configure_error = ""
        if self.params.settings.autostart:
            self.trigger_configure()
            if not self._entities:
                # started on its own (no lifecycle manager to retry): exit with the reason
                # rather than stay up unconfigured and silently decide nothing
                self.destroy_node()
                raise StartupError(f"{self._configure_error}; not started (autostart: a "
                                   f"managed node, autostart:=false, would stay unconfigured "
                                   f"for its manager instead)")
            self.trigger_activate()

    @property
    def session(self) -> HelpSession:
        """Return the help session.

        Made at configure (every callback that uses it starts there).
        """
        if self._session is None:
            raise RuntimeError("the node is not configured yet: it has no help session")
        return self._session

    @property
    def last_decision(self) -> Optional[dict]:
        """Return the last decision document published (None before the first)."""
        return self.output.last_decision

    @property
    def decisions_published(self) -> int:
        """Return the number of decision documents published since start."""
        return self.output.published

    @property
    def _store_file(self) -> str:
        """store_path resolved: empty means the default file under the ROS home."""
        return resolve_store_path(self.params.settings.store_path)

    # ---------------------------------------------------------------- lifecycle
    def on_configure(self, state: LifecycleState) -> TransitionCallbackReturn:
        s = self.params.settings
        label = f"store {self._store_file or '(memory)'}"
        status = StoreStatus(label)
        try:
            self.store = open_store(self._store_file, s.robot_id, model=self.params.model)
            self.held = HeldOutcomes(self.store, status, self.get_logger(), self._on_saved_late)
            # learned constants kept in the store are in force again (site_learning: apply)
            self.learning = NodeLearning(
                self.store, self.params.model, s.learning_settings(), model_ranges(),
                self.get_logger(), proposal_path(s.site_learning_proposal_path,
                                                 self._store_file), self.get_name())
            self.store.use_model(self.model_in_force)
            # the asks made before this start (own of the last hour) are loaded here
            self._session = HelpSession(self.store, self.model_in_force, self.params.config,
                                        s.session_rules(), now_s=self.now_s(), writer=self.held,
                                        status=status)
            self.session.active = False
        except Exception as exc:  # an unreadable store must not start a node that forgets
            self._configure_error = f"{label} could not open: {exc}"
            self.get_logger().error(self._configure_error)
            if self.store is not None:
                self.store.close()
                self.store = None
            return TransitionCallbackReturn.FAILURE
        health = getattr(self.store, "health", None)
        if health is not None and health.level != "OK":   # e.g. a damaged file moved aside
            status.ok, status.error = False, health.message[:200]
            self.get_logger().error(health.message)
        try:
            create_entities(self, s, self._entities)
        except Exception as exc:   # the lifecycle machinery would swallow it without a word
            self._configure_error = f"configure failed: {type(exc).__name__}: {exc}"
            self.get_logger().error(self._configure_error)
            self._teardown()
            return TransitionCallbackReturn.FAILURE
        self.get_logger().info(f"configured: {label}, params {self.params_hash()}, "
                               f"{len(self.session.robot_ask_times_s)} own ask(s) of the last "
                               f"hour from the store")
        return TransitionCallbackReturn.SUCCESS

    def on_activate(self, state: LifecycleState) -> TransitionCallbackReturn:
        self._active = self.session.active = True
        return TransitionCallbackReturn.SUCCESS

    def on_deactivate(self, state: LifecycleState) -> TransitionCallbackReturn:
        self._active = self.session.active = False
        return TransitionCallbackReturn.SUCCESS

    def on_cleanup(self, state: LifecycleState) -> TransitionCallbackReturn:
        self._teardown()
        return TransitionCallbackReturn.SUCCESS

    def on_shutdown(self, state: LifecycleState) -> TransitionCallbackReturn:
        self._teardown()
        return TransitionCallbackReturn.SUCCESS

    def _teardown(self) -> None:
        self._active = False
        if self.learning is not None:
            self.learning.shutdown()
        fleet = getattr(self, "fleet", None)
        if fleet is not None and self.store is not None:
            try:
                fleet.flush()          # peers' events received but not yet stored
            except Exception:  # noqa: BLE001 - a failing store: peers offer them again
                pass
        if self.held is not None:
            self.held.report_at_stop()
        self.upkeep.finish_store_jobs()
        destroy_entities(self, self._entities)
        self._entities = []
        if self.store is not None:
            self.store.close()
            self.store = None

    def destroy_node(self) -> None:
        # getattr: destroy_node also runs for a node whose parameters were refused
        held = getattr(self, "held", None)
        if held is not None:
            held.report_at_stop()
        self.upkeep.finish_store_jobs()
        store = getattr(self, "store", None)
        if store is not None:
            store.close()
            self.store = None
        super().destroy_node()

    # ---------------------------------------------------------------- helpers
    def now_s(self) -> float:
        return self.get_clock().now().nanoseconds * 1e-9

    def _read_clock(self) -> float:
        """Return the node's time; the session follows a jump of system time.

        The node's time, with a jump of system time against the steady clock followed by the
        session (sim time is the truth and is not followed).
        """
        now = self.now_s()
        clock = self.get_clock()
        sim_time = isinstance(clock, ROSClock) and clock.ros_time_is_active
        steady = None if sim_time else time.monotonic()
        self._apply(self.session.clock(now, steady))
        return now

    @property
    def model_in_force(self):
        """Return the site model decisions use.

        The parameter values, with the learned constants over them when site_learning is apply and
        a revision exists.
        """
        return self.learning.current if self.learning is not None else self.params.model

    @property
    def constants_source(self) -> tuple[str, int]:
        """("parameter_file", 0) or ("learned", revision): carried by every decision."""
        return self.learning.source if self.learning is not None else ("parameter_file", 0)

    def params_hash(self) -> str:
        return params_hash(self.model_in_force, self.params.config)

    def _on_parameters_changed(self) -> None:
        learning = getattr(self, "learning", None)
        if learning is not None:
            # the parameter values are the shrinkage target; a changed mode may put the file's
            # values back in force (off, propose) or the learned ones (apply)
            learning.set_parameters(self.params.model, self.params.settings.learning_settings())
        if getattr(self, "_session", None) is not None:
            self._use_model(self.model_in_force)

    def _use_model(self, model) -> None:
        """Put a site model in force.

        Beliefs are folded under it from now on (lazily, as each person is next read), new people
        start at its prior.
        """
        self.session.set_parameters(model, self.params.config,
                                    self.params.settings.session_rules())
        if self.store is not None:
            self.store.use_model(model)

    def opted_out_keys(self) -> list[str]:
        """Keys on the store's opt-out list."""
        return sorted(self.store.opted_out()) if self.store is not None else []

    def _on_saved_late(self, event) -> None:   # a held outcome stored at last: learn, share
        self.session.outcome_saved(event)
        self.fleet.publish(event)


def resolve_store_path(store_path: str) -> str:
    """'' -> <ROS_HOME or ~/.ros>/helpaware/beliefs.sqlite3; 'memory' -> '' (in this process)."""
    if store_path == MEMORY_STORE:
        return ""
    return store_path or str(default_store_path())


def main(args=None) -> int:
    shm = StartupSweep()   # shared memory of killed instances: claimed before rclpy
    try:
        rclpy.init(args=args)
    except RCLError as exc:   # e.g. a parameter file rcl cannot parse: say so, no traceback
        print(f"{NODE_NAME}: cannot start: {str(exc).strip()}", file=sys.stderr)
        return 2
    node = None
    code = 0
    try:
        # the executor exists before the node announces itself, so a signal that follows the
        # announcement never lands inside the executor's construction
        executor = SingleThreadedExecutor()
        node = HelpAwareNode()
        shm.participant_up(node.get_logger())    # removed, and this process recorded
        executor.add_node(node)
        executor.spin()
    except (KeyboardInterrupt, ExternalShutdownException):
        pass
    except StartupError as exc:
        print(f"{NODE_NAME}: {exc}", file=sys.stderr)
        code = 2
    except Exception:
        if rclpy.ok():
            raise
        # a signal shut the context down while the node was still starting: a clean exit
    finally:
        shm.before_shutdown()
        if node is not None:
            try:
                node.destroy_node()
            except Exception:  # the context may already be gone after a signal
                pass
        rclpy.try_shutdown()
        shm.finish()           # what this process leaves, once its participant is gone
    return code


if __name__ == "__main__":
    sys.exit(main())
