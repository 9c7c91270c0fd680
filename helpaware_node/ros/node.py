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
Beside this file: fleet.py, store_retry.py, diagnostics.py, markers.py, site_learning.py.
"""
from __future__ import annotations

import re
import sys
import time
from typing import Any, Optional

import rclpy
from rclpy._rclpy_pybind11 import RCLError
from rclpy.clock import Clock, ClockType, ROSClock
from rclpy.executors import ExternalShutdownException, SingleThreadedExecutor
from rclpy.lifecycle import LifecycleNode, LifecycleState, TransitionCallbackReturn
from rclpy.qos import qos_profile_sensor_data, QoSProfile, ReliabilityPolicy
from std_msgs.msg import String

from . import diagnostics as diag
from .fleet import FleetLink, PrivacyRequests
from .markers import PersonMarkers
from .params import model_ranges, NodeParameters
from .refusal_log import exception_text, LogThrottle
from .shm_files import StartupSweep
from .site_learning import NodeLearning, proposal_path
from .store_retry import HeldOutcomes
from .. import wire
from ..core import belief_at, params_hash, PersonRecord
from ..core.model import CoreInputError
from ..session import HelpSession, Step, StoreStatus
from ..session.state import MAX_GOAL_STATUSES
from ..store import default_store_path, open_store
from ..store.base import BeliefStore
from ..store.jobs import StoreJobs

NODE_NAME = "helpaware_decider"
GOAL_STATES = {4: "succeeded", 5: "canceled", 6: "aborted"}   # action_msgs/GoalStatus codes
RELIABLE = QoSProfile(depth=50, reliability=ReliabilityPolicy.RELIABLE)
# inputs that must not be lost in a burst while a long callback holds the executor: a
# KEEP_LAST reader overwrites the oldest unread message silently (depth is not part of QoS
# matching, so publishers with any depth still connect)
INPUT_QUEUE = QoSProfile(depth=1000, reliability=ReliabilityPolicy.RELIABLE)
HOUSEKEEPING_PERIOD_S = 0.5
MEMORY_STORE = "memory"   # store_path value for a store that lives only in this process


class StartupError(RuntimeError):
    """The node cannot start (refused parameters, store unavailable)."""


class HelpAwareNode(LifecycleNode):
    """Decides at each help need whether to ask a nearby person, and whom."""

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
        try:
            self.params = NodeParameters(self, on_change=self._on_parameters_changed)
        except (CoreInputError, rclpy.exceptions.ParameterException) as exc:
            raise StartupError(f"parameters refused: {exc}") from exc
        self.counters = diag.InputCounters()
        self.decisions_published = 0
        self.last_decision: Optional[dict] = None
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
            self._create_entities(s)
        except Exception as exc:   # the lifecycle machinery would swallow it without a word
            self._configure_error = f"configure failed: {type(exc).__name__}: {exc}"
            self.get_logger().error(self._configure_error)
            self._teardown()
            return TransitionCallbackReturn.FAILURE
        self.get_logger().info(f"configured: {label}, params {self.params_hash()}, "
                               f"{len(self.session.robot_ask_times_s)} own ask(s) of the last "
                               f"hour from the store")
        return TransitionCallbackReturn.SUCCESS

    def _create_entities(self, s) -> None:
        """Create publishers, subscriptions, timers, fleet link and privacy requests.

        Fleet link and privacy requests (configure).
        """
        from rclpy.event_handler import PublisherEventCallbacks, SubscriptionEventCallbacks
        sub_events = SubscriptionEventCallbacks(incompatible_qos=self._on_qos_incompatible)
        pub_events = PublisherEventCallbacks(incompatible_qos=self._on_qos_incompatible)
        self.decision_pub = self.create_publisher(String, "decision", RELIABLE,
                                                  event_callbacks=pub_events)
        from diagnostic_msgs.msg import DiagnosticArray
        from visualization_msgs.msg import MarkerArray
        self.marker_pub = self.create_publisher(MarkerArray, "markers", 10)
        self.diag_pub = self.create_publisher(DiagnosticArray, "/diagnostics", 10)
        subs = [
            self.create_subscription(String, "people", self._on_people, qos_profile_sensor_data,
                                     event_callbacks=sub_events),
            self.create_subscription(String, "task_status", self._on_task_status, INPUT_QUEUE,
                                     event_callbacks=sub_events),
            self.create_subscription(String, "outcome", self._on_outcome, INPUT_QUEUE,
                                     event_callbacks=sub_events),
        ]
        if s.navigation_status_topic:
            from action_msgs.msg import GoalStatusArray
            subs.append(self.create_subscription(GoalStatusArray, s.navigation_status_topic,
                                                 self._on_navigation_status, 10,
                                                 event_callbacks=sub_events))
        self.input_watch = diag.WatchedInputs(      # the input watchdog: silent topics
            {"people": subs[0], "task_status": subs[1]}, self.get_logger(), time.monotonic())
        # cadence on the steady clock: with use_sim_time a held /clock must not stop the
        # housekeeping (a need that came before the first /clock decides once it arrives)
        steady = Clock(clock_type=ClockType.STEADY_TIME)
        timers = [self.create_timer(s.diagnostics_period_s, self._publish_status, clock=steady),
                  self.create_timer(HOUSEKEEPING_PERIOD_S, self._housekeeping, clock=steady)]
        self._entities = subs + timers + [self.decision_pub, self.marker_pub, self.diag_pub]
        # forgets, opt-outs and compactions write their rows on a worker thread (store/jobs.py;
        # a forget on a store of a million events takes seconds): in force in memory at once,
        # reported back here by a guard condition the worker triggers
        wake = self.create_guard_condition(self._on_store_jobs)
        self.store_jobs = StoreJobs(self.store, wake=wake.trigger)
        self._entities.append(wake)
        # signed fleet documents in and out (outcomes and asks) and live opt-out/forget on the
        # site-wide topics from parameters (docs/store.md, docs/security.md)
        self.fleet = FleetLink(self, self.store, append_many=self.session.peer_events,
                               on_forgotten=self.session.forgotten, topic=s.fleet_topic,
                               jobs=self.store_jobs)
        self.privacy = PrivacyRequests(self, self.store, self.fleet, lambda action, key: (
            self.session.forgotten(key) if action == "forget" else None),
            topic=s.privacy_topic, allow_unsigned=s.allow_unsigned_privacy_requests)
        self._entities += self.fleet.entities + [self.privacy._sub]

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
        self._finish_store_jobs()
        for e in self._entities:
            try:
                if hasattr(e, "trigger"):
                    self.destroy_guard_condition(e)
                elif hasattr(e, "cancel"):
                    self.destroy_timer(e)
                elif hasattr(e, "publish"):
                    self.destroy_publisher(e)
                else:
                    self.destroy_subscription(e)
            except Exception:  # already gone at shutdown
                pass
        self._entities = []
        if self.store is not None:
            self.store.close()
            self.store = None

    def destroy_node(self) -> None:
        # getattr: destroy_node also runs for a node whose parameters were refused
        held = getattr(self, "held", None)
        if held is not None:
            held.report_at_stop()
        self._finish_store_jobs()
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

    def _reject(self, topic: str, reason: str) -> None:
        """Count and log a refused document.

        One line per topic and field at once, then at most one a minute with the number since
        (every count is in /diagnostics).
        """
        self.counters.reject(topic, reason)
        field = re.sub(r"\[\d+\]", "[]", reason.partition(":")[0])[:60]
        text = self.log_lines.due(f"rejected.{topic}.{field}",
                                  f"rejected {topic}: {reason[:200]}")
        if text is not None:
            self.get_logger().warning(text)

    def _failed(self, topic: str, exc: BaseException) -> None:
        """Count and log a document whose handling raised something that is not a refusal.

        Contained, counted apart (a defect to report) and as a rejection; the robot carries on.
        """
        self.counters.failed[topic] += 1
        self._reject(topic, f"document: could not be handled ({exception_text(exc)})")

    def _on_qos_incompatible(self, event) -> None:
        self.counters.qos_incompatible += 1
        self.get_logger().warning(f"incompatible QoS: {event}", throttle_duration_sec=5.0)

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

    # ---------------------------------------------------------------- inputs
    # each input topic is received in its own method below: count, decode, hand to the session
    def _on_people(self, msg: String) -> None:
        self.counters.received["people"] += 1
        self.input_watch.note("people", time.monotonic())
        try:
            doc = wire.decode("people", msg.data)
            people = wire.people_from(doc)
            self.session.people_seen(people, self.now_s(),
                                     doc.get("frame_id", "") or "base_link")
        except (wire.WireError, CoreInputError) as exc:
            self._reject("people", str(exc))
        except Exception as exc:  # noqa: BLE001 - no document may stop the robot
            self._failed("people", exc)

    def _on_task_status(self, msg: String) -> None:
        self.counters.received["task_status"] += 1
        self.input_watch.note("task_status", time.monotonic())
        try:
            doc = wire.decode("task_status", msg.data)
            if doc["state"] == "open":
                now = self._read_clock()
                step = self.session.need_opened(wire.help_need_from(doc, now), now)
            else:
                step = self.session.need_closed(doc["request_id"], doc["state"])
            self._apply(step)
        except (wire.WireError, CoreInputError) as exc:
            self._reject("task_status", str(exc))
        except Exception as exc:  # noqa: BLE001 - no document may stop the robot
            self._failed("task_status", exc)

    def _on_outcome(self, msg: String) -> None:
        self.counters.received["outcome"] += 1
        try:
            doc = wire.decode("outcome", msg.data)
            step = self.session.outcome(doc["request_id"], doc["person_id"], doc["result"],
                                        self._read_clock())
            self._apply(step)
        except (wire.WireError, CoreInputError) as exc:
            self._reject("outcome", str(exc))
        except Exception as exc:  # noqa: BLE001 - no document may stop the robot
            self._failed("outcome", exc)

    def _on_navigation_status(self, msg) -> None:
        """Take a navigation status array.

        Its last MAX_GOAL_STATUSES entries, at most one new need (from its newest aborted goal), so
        any array takes bounded time (session.navigation_status).
        """
        self.counters.received["navigation_status"] += 1
        try:
            entries = msg.status_list
            self.counters.statuses_skipped += max(len(entries) - MAX_GOAL_STATUSES, 0)
            goals = [(bytes(st.goal_info.goal_id.uuid).hex(), GOAL_STATES.get(st.status, ""),
                      st.goal_info.stamp.sec + st.goal_info.stamp.nanosec * 1e-9)
                     for st in entries[-MAX_GOAL_STATUSES:]]
            self._apply(self.session.navigation_status(goals, self._read_clock()))
        except CoreInputError as exc:
            self._reject("navigation_status", str(exc))
        except Exception as exc:  # noqa: BLE001 - no message may stop the robot
            self._failed("navigation_status", exc)

    def _on_saved_late(self, event) -> None:   # a held outcome stored at last: learn, share
        self.session.outcome_saved(event)
        self.fleet.publish(event)

    # ---------------------------------------------------------------- outputs
    def _apply(self, step: Step) -> None:
        """Publish the step's decisions, share what it stored, log its notes."""
        robot_id = getattr(self.store, "robot_id", "")
        model, config, source = self.session.model, self.params.config, self.constants_source
        for out in step.decisions:
            # parameters are spliced into the text from a cache (fast_text), not built per
            # decision; the values come from validated core values, so no second check
            doc = wire.decision_to_document(out.decision, out.robot_ask_times_s, None, None,
                                            robot_id, check=False)
            text = wire.fast_text(doc, model, config, source,
                                  finite=wire.evaluation_is_finite(out.decision))
            self.decision_pub.publish(String(data=text))
            self.decisions_published += 1
            self.markers.note_decision(out.decision)
            self.last_decision = doc
        for event in step.share:
            self.fleet.publish(event)     # stored here first: shared only once durable
        for note in step.notes:           # by kind, bounded: a document may cause a note
            line = self.log_lines.due(note.kind or note.level, note.text,
                                      note.throttle_s or None)
            if line is None:
                continue
            if note.level == "error":     # one call site per severity (rclpy's rule)
                self.get_logger().error(line)
            elif note.level == "warning":
                self.get_logger().warning(line)
            else:
                self.get_logger().info(line)

    def _on_store_jobs(self) -> None:
        """Run the reports of store jobs the worker finished (answers to requests)."""
        try:
            if self.store_jobs is not None:
                self.store_jobs.poll()
        except Exception as exc:  # noqa: BLE001 - a report must not stop the executor
            self.counters.housekeeping_errors += 1
            text = self.log_lines.due("store_job_error", f"store job report failed "
                                      f"({exception_text(exc)})")
            if text is not None:
                self.get_logger().error(text)

    def _finish_store_jobs(self) -> None:
        """Write a forget or opt-out asked for before the store closes."""
        jobs, self.store_jobs = getattr(self, "store_jobs", None), None
        if jobs is not None:
            try:
                if not jobs.close():
                    self.get_logger().error("store jobs still running at stop")
            except Exception:  # noqa: BLE001 - stopping: the store closes next
                pass

    def _housekeeping(self) -> None:
        try:
            assert self.held is not None and self.learning is not None   # made at configure
            self.held.retry()
            now = self._read_clock()
            learned = self.learning.poll(now)      # a refit finished in its worker: in force now
            if learned is not None:
                self._use_model(learned)
            self._apply(self.session.tick(now))
        except Exception as exc:  # noqa: BLE001 - state an input left must not stop the timer
            self.counters.housekeeping_errors += 1
            text = self.log_lines.due("housekeeping_error", f"housekeeping failed "
                                      f"({exception_text(exc)}); tried again next period")
            if text is not None:
                self.get_logger().error(text)

    def _publish_status(self) -> None:
        if not self._active:
            return
        stamp = self.get_clock().now().to_msg()
        self._publish_markers(stamp)
        rates = self.counters.rates_since_tick(self.params.settings.diagnostics_period_s)
        # every value reported is gathered here (diagnostics.decision_values)
        values = diag.decision_values(self, rates)
        new_rej = (self.counters.new_rejections_since_tick()
                   + self.side_refusals.new_since_tick(self))
        level, message = diag.level_for(new_rej, self.counters.qos_incompatible,
                                        self.session.status.ok)
        waiting = self.held.waiting if self.held is not None else 0
        if waiting:
            message = (f"store refuses writes: asking paused, {waiting} outcome(s) "
                       f"held in memory ({self.session.status.error})")[:250]
        level, message = self.input_watch.report(   # the input watchdog: silent topics
            time.monotonic(), diag.silence_limits_s(self.params.settings), values, level, message)
        self.diag_pub.publish(diag.status_array(f"{self.get_name()}: decision",
                                                self.get_fully_qualified_name(), stamp, values,
                                                level, message))

    def _publish_markers(self, stamp) -> None:
        if self.marker_pub.get_subscription_count() == 0:
            self.markers.reset(self.session.seen)   # a display topic: nobody shows it
            return
        model, now = self.session.model, self.now_s()
        memory = self.session.memory
        lifetime = max(2.0 * self.params.settings.diagnostics_period_s, 1.0)
        arr = self.markers.update(self.session.seen, lambda key: belief_at(
            memory.held(key) or PersonRecord.new(model), now, model).mean, stamp, lifetime)
        if arr is not None:
            self.marker_pub.publish(arr)


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
