//! Master/slave polling.
//!
//! The master polls the slaves in `order`, one poll per slave per cycle. A
//! slave whose receiver output shows the end of an intact poll waits its
//! turnaround plus a response latency, then asserts its enable and sends what
//! was queued when its receiver showed the poll's end (up to `max_per_poll`
//! data frames, back to back), or an empty reply. The master, once its receiver shows the end of
//! the reply, waits its own turnaround plus a response latency and polls the
//! next slave. If no reply has begun at the master's receiver by
//! `reply_timeout` after the end of its poll, the master polls the next slave
//! at that instant; a late reply then meets the next poll on the wire.
//!
//! A slave answers every intact poll addressed to it, unless it is still busy
//! with an earlier reply (its enable not yet released): such a poll is
//! ignored. The master reacts only to the reply to its latest poll; the end
//! of that reply's activity at its receiver is what it waits for, whether or
//! not the frames arrive intact.
//!
//! **Retries** (`retries = r`): when the reply to a poll is corrupted at the
//! master, or does not begin by the timeout, the master polls the same
//! slave again, up to r times. The slave keeps the messages of its latest
//! reply to the master until the master has them intact (the next poll
//! acknowledges them), sends the missing ones again on a retry, and gives
//! them up when the last retry fails. Messages it sends to other nodes go
//! once. A reply that begins after the timeout is not waited for: its
//! messages are delivered if they arrive intact, and given up if not.
//!
//! **Skipping silent slaves** (`dead_after = k`, `probe_every = p`): a
//! slave whose exchanges end without an answer k times in a row is skipped,
//! and polled again only in every p-th cycle; its first answer ends that.
//!
//! Zero-load cycle, with e = enable time, r = receiver delay, T = turnaround,
//! d(M,i) the wire delay master–slave i, Lp and Le the line bits of a poll and
//! of an empty reply and tb the bit time:
//!
//! ```text
//! cycle = Σ_i [ e_M + Lp·tb + d(M,i) + r_i + T_i + e_i + Le·tb + d(i,M) + r_M + T_M ]
//! ```

use tracing::debug;

use super::{sample_latency, AccessScheme, DurationStat, SchemeReport, SchemeValue};
use crate::engine::shortcut::Shortcuts;
use crate::engine::{Dest, FrameKind, FrameOut, Reception, TxTimes, World};
use crate::periodic::{Periodic, Visit, VisitExt};
use crate::spec::{NodeId, PollingSpec};
use crate::traffic::Message;
use crate::units::Picos;

const NEXT_POLL: u64 = 1;
const TIMEOUT: u64 = 2;
/// Timeouts of polls to external slaves: this plus the poll's number.
const EXTERNAL_TIMEOUT: u64 = 1 << 32;
/// The backup master's silence watchdog: this plus its generation.
const WATCHDOG: u64 = 1 << 62;

#[derive(Debug)]
pub struct Polling {
    spec: PollingSpec,
    /// Index into `order` of the slave being polled.
    idx: usize,
    /// When the current poll's timeout expires.
    deadline: Picos,
    /// The timeout timer was armed at poll time.
    timeout_armed: bool,
    /// Bus id of the master's latest poll.
    current_poll: u64,
    /// Number of the latest poll (all polls, for the external timeout tags).
    poll_seq: u64,
    /// The latest poll went to an external slave and its reply has not been accepted yet.
    awaiting_external: bool,
    /// Per node: until when its own reply keeps its enable asserted.
    busy_until: Vec<Picos>,
    ignored: u64,
    /// Enable time of the latest poll of `order[0]`.
    cycle_start: Option<Picos>,
    cycles: DurationStat,
    polls: u64,
    timeouts: u64,
    empty_replies: u64,
    data_replies: u64,
    /// Retries of the current slave's exchange so far.
    attempt: u32,
    /// Bus id of the reply to the current poll (`u64::MAX`: none yet).
    reply_occ: u64,
    /// A frame of that reply reached the master corrupted.
    reply_bad: bool,
    /// Per slave: messages of its latest reply to the master not yet acknowledged.
    held: Vec<Vec<Message>>,
    retries: u64,
    /// Per slave: exchanges in a row that ended without an answer.
    silent_in_row: Vec<u32>,
    /// Per slave: the cycle in which it was found silent, while it is skipped.
    skipped_since: Vec<Option<u64>>,
    /// Cycles begun (the poll order wrapped around).
    cycle_no: u64,
    skipped_polls: u64,
    /// The node polling now: the master, or the backup after a takeover.
    master: NodeId,
    /// The master's timer fired while it was down: polling waits for it.
    halted: bool,
    /// Generation of the backup's live watchdog.
    watch_gen: u64,
    /// Enable of the latest poll (by either master).
    last_poll: Option<Picos>,
    /// A takeover happened; its first poll has not been sent yet.
    taking_over: bool,
    takeovers: u64,
    /// From the last poll of the failed master to the first poll of the backup.
    unpolled: DurationStat,
    /// Whole cycles done in closed form.
    shortcuts: Shortcuts,
    /// Cycles can repeat exactly: no latency drawn per exchange, no backup master.
    may_repeat: bool,
}

impl Polling {
    pub fn new(spec: PollingSpec) -> Self {
        let nodes = spec.turnaround.len();
        let spec_master = spec.master;
        let may_repeat = !crate::engine::delays::draws(&spec.response_latency) && spec.backup_master.is_none();
        Polling {
            spec,
            idx: 0,
            deadline: Picos::ZERO,
            timeout_armed: false,
            current_poll: u64::MAX,
            poll_seq: 0,
            awaiting_external: false,
            busy_until: vec![Picos::ZERO; nodes],
            ignored: 0,
            cycle_start: None,
            cycles: DurationStat::default(),
            polls: 0,
            timeouts: 0,
            empty_replies: 0,
            data_replies: 0,
            attempt: 0,
            reply_occ: u64::MAX,
            reply_bad: false,
            held: vec![Vec::new(); nodes],
            retries: 0,
            silent_in_row: vec![0; nodes],
            skipped_since: vec![None; nodes],
            cycle_no: 0,
            skipped_polls: 0,
            master: spec_master,
            halted: false,
            watch_gen: 0,
            last_poll: None,
            taking_over: false,
            takeovers: 0,
            unpolled: DurationStat::default(),
            shortcuts: Shortcuts::default(),
            may_repeat,
        }
    }

    fn poll(&mut self, w: &mut World) {
        let master = self.master;
        if w.is_down(master) {
            // A down master polls nobody; it resumes if it comes back.
            self.halted = true;
            return;
        }
        let mut now = w.now();
        if std::mem::take(&mut self.taking_over) {
            if let Some(last) = self.last_poll {
                if w.in_window(now) {
                    self.unpolled.record((now - last).0);
                }
            }
        }
        let slave = self.spec.order[self.idx];
        if self.idx == 0 {
            if let Some(prev) = self.cycle_start {
                if prev >= w.spec().warmup && w.in_window(now) {
                    self.cycles.record((now - prev).0);
                }
            }
            self.cycle_start = Some(now);
            if self.attempt == 0 && self.may_repeat {
                // A cycle begins: the cycles that repeat the last one
                // exactly may be done in closed form (moving `now` on).
                let mut shortcuts = std::mem::take(&mut self.shortcuts);
                shortcuts.at_period_start(w, self, None);
                self.shortcuts = shortcuts;
                now = w.now();
            }
        }
        if w.in_window(now) {
            self.polls += 1;
        }
        let poll = FrameOut::control(FrameKind::Poll, Dest::Node(slave), self.spec.request_bits);
        let tx = w.transmit(master, now, &[poll]);
        self.last_poll = Some(tx.enable);
        self.watch(w, &tx);
        self.current_poll = tx.occupancy;
        self.reply_occ = u64::MAX;
        self.reply_bad = false;
        self.deadline = tx.last_bit + self.spec.reply_timeout;
        debug!(t_ps = now.0, master = %w.spec().nodes[master].name, slave = %w.spec().nodes[slave].name, "poll");
        // If the slave cannot even see the poll before the deadline, the timeout
        // is certain to fire first: arm it now. Otherwise it is armed, when
        // needed, at the slave's decision.
        self.poll_seq += 1;
        self.awaiting_external = w.is_externally_driven(slave);
        if self.awaiting_external {
            // An external slave's answer is not known in advance: the timeout
            // is armed now and ignored if the reply arrives in time.
            self.timeout_armed = false;
            w.set_timer(master, self.deadline, EXTERNAL_TIMEOUT + self.poll_seq);
            return;
        }
        self.timeout_armed = w.reacts_at(master, slave, tx.last_bit) > self.deadline;
        if self.timeout_armed {
            w.set_timer(master, self.deadline, TIMEOUT);
        }
    }

    /// Re-arm the backup master's watchdog: it takes over when it has seen
    /// no poll for `takeover_after` after the end of this one.
    fn watch(&mut self, w: &mut World, poll: &TxTimes) {
        let Some(backup) = self.spec.backup_master else { return };
        if backup == self.master {
            return;
        }
        self.watch_gen += 1;
        let at = w.seen_at(self.master, backup, poll.off) + self.spec.takeover_after;
        w.set_timer(backup, at, WATCHDOG + self.watch_gen);
    }

    /// The backup master has heard no poll for `takeover_after`: it polls
    /// from now on, continuing with the next slave in order.
    fn take_over(&mut self, w: &mut World, backup: NodeId) {
        if w.is_down(backup) {
            return;
        }
        debug!(t_ps = w.now().0, backup = %w.spec().nodes[backup].name, "backup master takes over");
        if w.in_window(w.now()) {
            self.takeovers += 1;
        }
        let old = self.master;
        w.node_found_silent(old);
        for held in &mut self.held {
            for m in held.iter_mut().filter(|m| m.dest == old) {
                m.dest = backup; // the slave answers whoever polls it
            }
        }
        self.master = backup;
        self.halted = false;
        self.taking_over = true;
        self.attempt = 0;
        self.reply_occ = u64::MAX;
        self.current_poll = u64::MAX;
        self.awaiting_external = false;
        self.timeout_armed = false;
        self.advance(w);
    }

    /// The exchange with the current slave has had its answer (`answered`)
    /// or timed out: poll it again (a retry) or move on to the next slave.
    fn conclude(&mut self, w: &mut World, answered: bool) {
        let slave = self.spec.order[self.idx];
        let failed = !answered || self.reply_bad || !self.held[slave].is_empty();
        if failed && self.attempt < self.spec.retries {
            self.attempt += 1;
            if w.in_window(w.now()) {
                self.retries += 1;
            }
            self.poll(w);
            return;
        }
        if self.reply_occ != u64::MAX && !answered {
            // A reply begun after the timeout: its messages meet their fate on
            // arrival (see on_receive), not here.
            self.held[slave].clear();
        }
        for _ in 0..self.held[slave].len() {
            w.count_given_up();
        }
        self.held[slave].clear();
        w.set_holding(slave, 0);
        self.attempt = 0;
        if answered {
            self.silent_in_row[slave] = 0;
            if self.skipped_since[slave].take().is_some() || w.is_node_back(slave) {
                w.node_answered(slave);
            }
        } else {
            self.silent_in_row[slave] = self.silent_in_row[slave].saturating_add(1);
            if self.spec.dead_after.is_some_and(|k| self.silent_in_row[slave] >= k)
                && self.skipped_since[slave].is_none()
            {
                self.skipped_since[slave] = Some(self.cycle_no);
                w.node_found_silent(slave);
            }
        }
        self.advance(w);
    }

    /// Poll the next slave in order that is not being skipped this cycle.
    fn advance(&mut self, w: &mut World) {
        let n = self.spec.order.len();
        if self.spec.dead_after.is_none() && self.master == self.spec.master {
            // Nobody is skipped: the next in order.
            self.idx = (self.idx + 1) % n;
            self.cycle_no += u64::from(self.idx == 0);
            self.poll(w);
            return;
        }
        let mut passed = 0;
        loop {
            self.idx = (self.idx + 1) % n;
            if self.idx == 0 {
                self.cycle_no += 1;
                if passed >= n {
                    // A whole cycle skipped: every slave is skipped. Jump to
                    // the next cycle in which one is probed (O(n), not O(n·p)).
                    let p = u64::from(self.spec.probe_every);
                    let next = self
                        .skipped_since
                        .iter()
                        .flatten()
                        .map(|&since| since + (self.cycle_no - since).div_ceil(p) * p)
                        .min()
                        .expect("every slave is skipped");
                    let jumped = next - self.cycle_no;
                    if w.in_window(w.now()) {
                        self.skipped_polls += jumped * n as u64;
                    }
                    self.cycle_no = next;
                    passed = 0;
                }
            }
            let slave = self.spec.order[self.idx];
            if slave == self.master {
                // A backup that took over does not poll itself.
                passed += 1;
                continue;
            }
            match self.skipped_since[slave] {
                Some(since) if !(self.cycle_no - since).is_multiple_of(u64::from(self.spec.probe_every)) => {
                    passed += 1;
                    if w.in_window(w.now()) {
                        self.skipped_polls += 1;
                    }
                }
                _ => break,
            }
        }
        self.poll(w);
    }

    /// The master's latest poll got no reply: unless armed already, its
    /// timeout fires at the deadline.
    fn no_reply(&mut self, w: &mut World, poll: u64) {
        if poll == self.current_poll && !self.timeout_armed {
            self.timeout_armed = true;
            w.set_timer(self.master, self.deadline.max(w.now()), TIMEOUT);
        }
    }

    fn reply(&mut self, w: &mut World, slave: NodeId, poll: u64) {
        let now = w.now();
        let master = self.master;
        let wait = self.spec.turnaround[slave] + sample_latency(&self.spec.response_latency, w.rng(slave));
        let limit = match self.spec.max_per_poll {
            0 => usize::MAX,
            n => n as usize,
        };
        let counted = w.in_window(now);
        w.begin_tx(slave, now + wait);
        let overhead = w.spec().frame.overhead_bits;
        let resend = !self.held[slave].is_empty();
        let take = if resend { self.held[slave].len() } else { w.queue_len(slave).min(limit) };
        if take == 0 {
            w.add_frame(FrameOut::control(FrameKind::EmptyReply, Dest::Node(master), self.spec.empty_reply_bits));
            if counted {
                self.empty_replies += 1;
            }
        } else {
            for k in 0..take {
                let msg = if resend {
                    self.held[slave][k]
                } else {
                    let mut msg = w.pop_message(slave).expect("queue length checked");
                    if msg.dest == self.spec.master {
                        // Addressed to the master: whichever node polls now.
                        msg.dest = master;
                    }
                    if msg.dest == master && self.spec.retries > 0 {
                        // Kept until the master has it (without retries, sent once).
                        self.held[slave].push(msg);
                    }
                    msg
                };
                w.count_access_attempt();
                w.add_frame(FrameOut::data(msg, overhead));
            }
            if self.spec.retries > 0 {
                w.set_holding(slave, self.held[slave].len());
            }
            if counted {
                self.data_replies += 1;
            }
        }
        let tx = w.finish_tx();
        self.busy_until[slave] = tx.release;
        debug!(t_ps = now.0, slave = %w.spec().nodes[slave].name, frames = take, enable_ps = tx.enable.0, "reply");
        if poll != self.current_poll {
            // The master has moved on: this reply is late.
            return;
        }
        self.reply_occ = tx.occupancy;
        if self.timeout_armed {
            return; // the timeout fires before the reply begins
        }
        let starts_at_master = w.seen_at(slave, master, tx.first_bit);
        if starts_at_master > self.deadline {
            self.no_reply(w, poll);
        } else {
            let master_wait = self.spec.turnaround[master] + sample_latency(&self.spec.response_latency, w.rng(master));
            let next = w.reacts_at(slave, master, tx.last_bit) + master_wait;
            w.set_timer(master, next, NEXT_POLL);
        }
    }
}

impl Periodic for Polling {
    /// Every field, for closed-form cycles (`engine::shortcut`). Draws,
    /// a backup master, external slaves, held messages and skipped slaves
    /// refuse them.
    fn visit(&mut self, v: &mut dyn Visit) {
        use crate::engine::delays::draws;
        if draws(&self.spec.response_latency)
            || self.spec.backup_master.is_some()
            || self.awaiting_external
            || self.taking_over
            || self.halted
            || self.timeout_armed
            || self.held.iter().any(|h| !h.is_empty())
            || self.skipped_since.iter().any(|s| s.is_some())
        {
            v.refuse();
            return;
        }
        v.same(self.idx as u64);
        v.same(u64::from(self.attempt));
        v.same(self.master as u64);
        v.flag(self.reply_bad);
        v.picos(&mut self.deadline);
        v.id(&mut self.current_poll);
        v.id(&mut self.reply_occ);
        for t in &mut self.busy_until {
            // Only compared with the instant a poll is seen: past is never.
            v.bound(&mut t.0);
        }
        v.opt_picos(&mut self.cycle_start);
        v.opt_picos(&mut self.last_poll);
        for &n in &self.silent_in_row {
            v.same(u64::from(n));
        }
        v.same(self.takeovers);
        v.same(self.unpolled.count);
        v.same(self.watch_gen);
        v.tally(&mut self.cycles.count);
        v.tally_wide(&mut self.cycles.sum_ps);
        for x in [
            &mut self.poll_seq,
            &mut self.cycle_no,
            &mut self.polls,
            &mut self.timeouts,
            &mut self.empty_replies,
            &mut self.data_replies,
            &mut self.ignored,
            &mut self.retries,
            &mut self.skipped_polls,
        ] {
            v.tally(x);
        }
    }
}

impl AccessScheme for Polling {
    fn name(&self) -> &'static str {
        "polling"
    }

    fn resends_corrupted(&self) -> bool {
        true
    }

    fn holds(&self, msg: &Message) -> bool {
        self.held[msg.source].contains(msg)
    }

    fn default_destination(&self, _source: NodeId) -> NodeId {
        self.spec.master
    }

    fn on_node_fault(&mut self, w: &mut World, node: NodeId, down: bool) {
        if !down && node == self.master && std::mem::take(&mut self.halted) {
            // The master is back: it polls the slave it was on, afresh.
            self.attempt = 0;
            self.poll(w);
        }
    }

    fn start(&mut self, w: &mut World) {
        self.poll(w);
    }

    fn on_timer(&mut self, w: &mut World, node: NodeId, tag: u64) {
        if tag >= WATCHDOG {
            if tag - WATCHDOG == self.watch_gen && node != self.master {
                self.take_over(w, node);
            }
            return;
        }
        if node != self.master {
            return; // a timer of a master that was replaced
        }
        if w.is_down(node) {
            self.halted = true;
            return;
        }
        if tag >= EXTERNAL_TIMEOUT {
            if tag - EXTERNAL_TIMEOUT != self.poll_seq || !self.awaiting_external {
                return; // answered in time, or a poll ago
            }
            self.awaiting_external = false;
            if w.in_window(w.now()) {
                self.timeouts += 1;
            }
            debug!(t_ps = w.now().0, "reply timeout (external slave)");
            self.conclude(w, false);
            return;
        }
        match tag {
            NEXT_POLL => self.conclude(w, true),
            TIMEOUT => {
                if w.in_window(w.now()) {
                    self.timeouts += 1;
                }
                debug!(t_ps = w.now().0, "reply timeout");
                self.conclude(w, false);
            }
            _ => unreachable!("polling sets only its own timers"),
        }
    }

    fn on_receive(&mut self, w: &mut World, rx: &Reception) {
        let master = self.master;
        if rx.kind == FrameKind::Data || rx.kind == FrameKind::EmptyReply {
            if rx.at == master && rx.occupancy == self.reply_occ {
                // Part of the reply the master waits on.
                if rx.corrupted {
                    self.reply_bad = true;
                    if self.spec.retries == 0 && rx.message.is_some() {
                        w.count_given_up(); // no retry: its one attempt failed
                    }
                } else if let Some(m) = rx.message.filter(|_| self.spec.retries > 0) {
                    let held = &mut self.held[rx.from];
                    if let Some(i) = held.iter().position(|h| *h == m) {
                        held.remove(i);
                    }
                    w.set_holding(rx.from, held.len());
                }
            } else if rx.corrupted && rx.message.is_some() {
                // Sent once (to another node, or in a reply the master no longer waits on).
                w.count_given_up();
            }
            return;
        }
        // Only slaves answer polls (an external node could address one to the master).
        if rx.kind != FrameKind::Poll || rx.at == master {
            return;
        }
        if rx.corrupted {
            debug!(t_ps = w.now().0, "poll corrupted at slave; no reply");
            self.no_reply(w, rx.occupancy);
            return;
        }
        if w.now() < self.busy_until[rx.at] {
            debug!(t_ps = w.now().0, slave = %w.spec().nodes[rx.at].name, "poll ignored: still busy with a reply");
            if w.in_window(w.now()) {
                self.ignored += 1;
            }
            self.no_reply(w, rx.occupancy);
            return;
        }
        self.reply(w, rx.at, rx.occupancy);
    }

    fn on_unheard(&mut self, w: &mut World, rx: &Reception) {
        if rx.kind == FrameKind::Poll {
            debug!(t_ps = w.now().0, slave = %w.spec().nodes[rx.at].name, "poll to a down slave");
            self.no_reply(w, rx.occupancy);
        } else if let Some(m) = rx.message {
            if !self.holds(&m) {
                w.count_given_up(); // sent once, to a node that is down
            }
        }
    }

    fn on_external_tx(&mut self, w: &mut World, slave: NodeId, tx: &TxTimes, kinds: &[FrameKind]) {
        let now = w.now();
        let is_reply = kinds.iter().all(|k| matches!(k, FrameKind::Data | FrameKind::EmptyReply));
        if is_reply && w.in_window(now) {
            if kinds.contains(&FrameKind::Data) {
                self.data_replies += 1;
            } else if kinds.contains(&FrameKind::EmptyReply) {
                self.empty_replies += 1;
            }
        }
        let master = self.master;
        if !is_reply || !self.awaiting_external || self.spec.order[self.idx] != slave {
            return; // not an answer to the poll the master waits on
        }
        if w.seen_at(slave, master, tx.first_bit) > self.deadline {
            return; // too late: the timeout fires first
        }
        self.awaiting_external = false;
        let master_wait = self.spec.turnaround[master] + sample_latency(&self.spec.response_latency, w.rng(master));
        let next = w.reacts_at(slave, master, tx.last_bit) + master_wait;
        w.set_timer(master, next, NEXT_POLL);
    }

    fn report(&self, _w: &World) -> SchemeReport {
        SchemeReport {
            name: "polling",
            fields: vec![
                ("cycle_mean_s", SchemeValue::Seconds(self.cycles.mean_s())),
                ("cycle_max_s", SchemeValue::Seconds(self.cycles.max_s())),
                ("cycles", SchemeValue::Count(self.cycles.count)),
                ("polls", SchemeValue::Count(self.polls)),
                ("data_replies", SchemeValue::Count(self.data_replies)),
                ("empty_replies", SchemeValue::Count(self.empty_replies)),
                ("timeouts", SchemeValue::Count(self.timeouts)),
                ("polls_ignored", SchemeValue::Count(self.ignored)),
                ("retries", SchemeValue::Count(self.retries)),
                ("skipped_polls", SchemeValue::Count(self.skipped_polls)),
            ]
            .into_iter()
            .chain(
                self.spec
                    .backup_master
                    .map(|_| {
                        [
                            ("takeovers", SchemeValue::Count(self.takeovers)),
                            ("unpolled_max_s", SchemeValue::Seconds(self.unpolled.max_s())),
                        ]
                    })
                    .into_iter()
                    .flatten(),
            )
            .collect(),
        }
    }
}
