#include "daemon/executor.hpp"
#include "daemon/run_fits.hpp"

#include "daemon/api_json.hpp"
#include "formats/report_json.hpp"

#include "daemon/part_analysis.hpp"
#include "daemon/vector_analysis.hpp"

#include "drivers/errors.hpp"
#include "drivers/levels.hpp"
#include "fitting/ac_charge_fit.hpp"
#include "fitting/joint_fit.hpp"
#include "fitting/electrothermal_fit.hpp"
#include "fitting/extract.hpp"
#include "fitting/pin_diode.hpp"

#include <algorithm>
#include <chrono>
#include <cmath>
#include <limits>
#include <optional>
#include <cstdio>
#include <cstdlib>
#include <set>
#include <sstream>
#include <thread>

namespace junco::daemon {

namespace {

using Clock = std::chrono::steady_clock;

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

// Current-targeted steps: corrections of the supply voltage per step, and
// the tolerance that ends them (common practice, no source). Bounded steps
// (target_current) do not count as corrections; kMaxTargetReadings caps all.
constexpr int kTargetIterations = 5;
constexpr int kMaxTargetReadings = 24;
constexpr double kTargetTolerance = 0.02;
constexpr double kOffTarget = 0.05;
// Diode voltage assumed before the first reading of a current-targeted sweep.
constexpr double kFirstVfGuessV = 0.5;
// The largest change of the supply in one correction (common practice, no source).
constexpr double kMaxTargetStepV = 0.5;

// Why a job stops before its end; thrown out of the step loop.
struct JobStop {
  enum class Why { pause, cancel, shutdown, fault, timeout } why;
  std::string message;
};

double unix_time_s() {
  return std::chrono::duration<double>(std::chrono::system_clock::now().time_since_epoch()).count();
}

// Driver messages already name the error kind (drivers/errors.hpp).
std::string describe(const drivers::DriverError& e) { return e.what(); }

// Test hook (docs/daemon-core.md, "Fault points"): with the environment
// variable JUNCOD_FAULT_POINT set to `name`, the executor logs that it
// reached the point and holds there until the process is killed, so a test
// can SIGKILL juncod at exactly that moment. Unset, this is one getenv.
void fault_point(const char* name, const LogFn& log) {
  static const char* const wanted = std::getenv("JUNCOD_FAULT_POINT");
  if (!wanted || std::string_view(wanted) != name) return;
  log(std::string("fault point ") + name + " reached: holding here until killed (JUNCOD_FAULT_POINT, tests only)");
  for (;;) std::this_thread::sleep_for(std::chrono::hours(1));
}

// Runs one job on an open bench; owns nothing, lives for one run_job() call.
class JobRun {
 public:
  JobRun(const Config& c, Store& s, JobQueue& q, EventBus& ev, Bench& b, const LogFn& log, Id id, const Plan& plan, long done, long total)
      : cfg_(c), store_(s), queue_(q), events_(ev), bench_(b), log_(log), job_id_(id), plan_(plan), steps_(expand_steps(plan)),
        points_done_(done), points_total_(total), started_(Clock::now()),
        // max_job_s counts from the job's first start, across pauses and restarts.
        deadline_(started_ + std::chrono::duration_cast<Clock::duration>(
                                 std::chrono::duration<double>(c.safety.max_job_s - s.seconds_since_first_start(id)))) {}

  // Without a chamber: every part once, at the plan's temp_k. With
  // plan.temps_k: for each set point in order, soak, then every part; a
  // temperature whose runs are all done (before a restart) is not soaked
  // again. After the last one, each part's temperature law.
  void run_all_parts() {
    if (plan_.temps_k.empty()) {
      for (const auto& part : plan_.parts) run_part(part, 0, kNaN);
      return;
    }
    for (std::size_t k = 0; k < plan_.temps_k.size(); ++k) {
      if (temperature_done(static_cast<int>(k))) continue;
      soak(plan_.temps_k[k]);
      for (const auto& part : plan_.parts) run_part(part, static_cast<int>(k), plan_.temps_k[k]);
    }
    fit_temperature_laws();
  }

 private:
  bool temperature_done(int temp_index) {
    const auto runs = store_.runs_of_job(job_id_);
    int done = 0;
    for (const auto& r : runs) done += r.temp_index == temp_index && r.state == RunState::done;
    return done >= static_cast<int>(plan_.parts.size());
  }

  // temp_index / setpoint_k: which of plan.temps_k (NaN set point: no chamber).
  void run_part(const PartSpec& part, int temp_index, double setpoint_k) {
    const Id lot_id = store_.ensure_lot(plan_.lot);
    const Id part_id = store_.ensure_part(lot_id, part.label, part.slot);
    RunFixture fixture = run_fixture(cfg_.fixture);
    // What the AC instruments take and read, kept with the run: the plan's
    // amplitude was converted to the generator's unit, and the readings'
    // ac_unit says what the meter measured.
    if (plan_.ac && bench_.siggen && bench_.levelmeter)
      fixture.ac_units = AcUnits{drivers::to_string(plan_.ac->unit), bench_.siggen->amplitude_units(), bench_.levelmeter->level_units()};
    const bool chamber = std::isfinite(setpoint_k);
    const RunRecord run = store_.ensure_run(job_id_, part_id, part.slot, fixture, chamber ? setpoint_k : plan_.temp_k, temp_index, setpoint_k);
    part_label_ = part.label;
    part_id_ = part_id;
    run_id_ = run.id;
    if (run.state == RunState::done) {  // finished before a restart
      // A run marked done by an older juncod may lack its fit (it was stored
      // after the run's end, in a separate transaction): fit it now.
      for (const auto& orphan : store_.runs_without_fit(job_id_, true))
        if (orphan.id == run.id) fit_and_finish(part_id, run.id, fixture, std::isfinite(run.temp_k) ? run.temp_k : plan_.temp_k);
      return;
    }
    const auto last = store_.last_seq(run.id);
    const std::size_t first = last ? static_cast<std::size_t>(*last + 1) : 0;
    stopped_high_ = store_.run_has_flag(run.id, kLimitFlags);
    // With a chamber the run's ambient is what the chamber reads around the
    // part's readings (their mean is the fit's temperature), logged with the run.
    double temp_k = plan_.temp_k;
    const double before_k = chamber ? read_chamber_k() : kNaN;
    if (first < steps_.size()) measure(part.slot, first);
    if (chamber) {
      const double after_k = read_chamber_k();
      temp_k = 0.5 * (before_k + after_k);
      store_.set_run_ambient(run.id, before_k, after_k, temp_k);
      char line[200];
      std::snprintf(line, sizeof line, ": ambient %.3f K before, %.3f K after its readings (set point %.2f K)", before_k, after_k, setpoint_k);
      log_("job " + std::to_string(job_id_) + " part " + part_label_ + line);
    }
    fault_point("before_run_end", log_);
    fit_and_finish(part_id, run.id, fixture, temp_k);
  }

  double read_chamber_k() {
    double t = kNaN;
    guarded([&] { t = bench_.chamber->measure_temperature_k(); });
    return t;
  }

  // The chamber to set_k, then wait until its readback has stayed within
  // plan.soak.tolerance_k for plan.soak.hold_s without a break. Polled every
  // hold_s/10 (50 ms…1 s); pause, cancel, shutdown and max_job_s act as
  // anywhere else; a chamber not settled within safety.max_soak_s is a
  // fault (the job pauses, the chamber goes to its idle set point).
  void soak(double set_k) {
    part_label_ = "(chamber soak)";
    const auto& lim = cfg_.safety;
    if (lim.chamber_max_rate_k_per_min > 0) guarded([&] { bench_.chamber->set_rate_k_per_min(lim.chamber_max_rate_k_per_min); });
    guarded([&] { bench_.chamber->set_temperature_k(set_k); });
    const double tol = plan_.soak.tolerance_k, hold = plan_.soak.hold_s;
    char line[200];
    std::snprintf(line, sizeof line, ": chamber to %.2f K (%.2f °C); soaking until within ±%g K for %g s", set_k, set_k - 273.15, tol, hold);
    log_("job " + std::to_string(job_id_) + line);
    const auto start = Clock::now();
    const auto give_up = start + std::chrono::duration_cast<Clock::duration>(std::chrono::duration<double>(lim.max_soak_s));
    const double poll_s = std::clamp(hold / 10.0, 0.05, 1.0);
    std::optional<Clock::time_point> inside_since;
    for (;;) {
      poll();
      const double t = read_chamber_k();
      const auto now = Clock::now();
      if (std::fabs(t - set_k) <= tol) {
        if (!inside_since) inside_since = now;
        if (std::chrono::duration<double>(now - *inside_since).count() >= hold) {
          std::snprintf(line, sizeof line, ": chamber soaked at %.3f K (set point %.2f K) after %.1f s", t, set_k,
                        std::chrono::duration<double>(now - start).count());
          log_("job " + std::to_string(job_id_) + line);
          return;
        }
      } else {
        inside_since.reset();
      }
      if (now > give_up) {
        std::ostringstream os;
        os << "chamber did not settle at " << set_k << " K ± " << tol << " K for " << hold << " s within safety limit max_soak_s = " << lim.max_soak_s
           << " s (last readback " << t << " K)";
        throw JobStop{JobStop::Why::fault, os.str()};
      }
      wait(poll_s);
    }
  }

  // Each part's EG, XTI (TRS1) from this job's runs at every temperature
  // (fitting/temperature_fit.hpp), stored with the part; logged, never fatal.
  void fit_temperature_laws() {
    for (const auto& part : plan_.parts) {
      const Id part_id = store_.ensure_part(store_.ensure_lot(plan_.lot), part.label, part.slot);
      const TemperatureLawReport law = temperature_law_of_runs(store_.fits_of_job_part(job_id_, part_id), fitting::TemperatureLaw{});
      store_.insert_temperature_fit(part_id, job_id_, law);
      const fitting::TemperatureFit& f = law.fit;
      std::string line = "job " + std::to_string(job_id_) + " part " + part.label + ": temperature law " + (f.ok ? "ok" : "failed");
      if (f.ok) {
        char buf[200];
        std::snprintf(buf, sizeof buf, ": EG %.4f ± %.4f eV, XTI %.3g%s, from %zu temperatures", f.eg_ev.value, f.eg_ev.std_error,
                      f.xti.value, f.xti_held ? " (held)" : "", f.temps_k.size());
        line += buf;
      } else {
        line += " (" + f.message + ")";
      }
      log_(line);
    }
  }

  void measure(int slot, std::size_t first) {
    check(bench_.make_safe(), "making the bench safe");
    guarded([&] { bench_.scanner->connect_slot(slot); });
    part_slot_ = connected_slot_ = slot;
    guarded([&] {
      bench_.source->set_current_limit_a(compliance_a(plan_, cfg_));  // before output on, always
      bench_.source->set_voltage_v(0.0);
      bench_.source->set_output(true);
    });
    biased_index_ = reversed_index_ = forward_vector_index_ = -1;
    siggen_on_ = false;
    source_on_ = true;
    pulse_index_ = -1;
    vf_guess_v_ = kFirstVfGuessV;
    try {
      for (std::size_t seq = first; seq < steps_.size(); ++seq) step_at(seq);
    } catch (...) {
      commit_pending();  // what was taken before a stop stays
      throw;
    }
    commit_pending();
    check(bench_.make_safe(), "making the bench safe after the part");
  }

  void step_at(std::size_t seq) {
    const Step& step = steps_[seq];
    const bool reverse = is_reverse(step.kind);
    // A new bias step begins (a pulse's dwell readings belong to its step:
    // no commit between them, it would shift their timing).
    // A forward_vector step begins one when its current differs from the previous step's.
    const bool new_forward_vector = step.kind == Step::Kind::forward_vector &&
                                    (seq == 0 || steps_[seq - 1].kind != Step::Kind::forward_vector || steps_[seq - 1].dc_index != step.dc_index);
    if ((step.kind == Step::Kind::dc && step.series != Series::dwell) || step.kind == Step::Kind::reverse || new_forward_vector) commit_pending();
    poll();
    if (stopped_high_ && !reverse) {
      ++skipped_;
      return;
    }
    PointRow p = take_with_retries(step);
    p.run_id = run_id_;
    p.seq = static_cast<long>(seq);
    pending_.push_back(p);
    // A pulse ends with its last reading: output off until the next one.
    const bool pulse_goes_on = seq + 1 < steps_.size() && steps_[seq + 1].kind == Step::Kind::dc &&
                               steps_[seq + 1].series == Series::dwell && steps_[seq + 1].dc_index == step.dc_index;
    if (step.pulsed && !(pulse_goes_on && !(p.flags & kLimitFlags))) guarded([&] { end_pulse(); });
    if (p.flags & kLimitFlags) {
      stopped_high_ = true;
      guarded([&] { bench_.source->set_voltage_v(0.0); });
      log_.warn("job " + std::to_string(job_id_) + " part " + part_label_ + ": " +
           ((p.flags & flag_current_limit) ? "supply in current limit" : "power above max_power_w") + " at step " +
           std::to_string(seq) + "; no further forward steps");
    }
  }

  // One transaction per bias step: its DC reading and the AC readings at that
  // bias (a crash loses at most the step being taken; resume retakes it).
  void commit_pending() {
    if (pending_.empty()) return;
    store_.insert_points(job_id_, pending_);
    points_done_ += static_cast<long>(pending_.size());
    taken_ += static_cast<long>(pending_.size());
    for (const auto& p : pending_) publish_point(p);
    pending_.clear();
    publish_progress();
  }

  // --- one reading ---------------------------------------------------------

  PointRow take_with_retries(const Step& step) {
    for (int attempt = 1;; ++attempt) {
      try {
        PointRow p = take(step);
        if (attempt > 1) p.flags |= flag_retried;
        return p;
      } catch (const drivers::DriverError& e) {
        // A command error (-1xx) or a config error comes back the same every time.
        const bool retry = !e.permanent() && attempt < kPointAttempts;
        log_.warn("job " + std::to_string(job_id_) + " part " + part_label_ + ": " + describe(e) +
             (retry ? " (retrying, attempt " + std::to_string(attempt) + ")" : ""));
        if (!retry)
          throw JobStop{JobStop::Why::fault, describe(e) + " (part " + part_label_ + ", after " + std::to_string(attempt) + " attempts)"};
        biased_index_ = reversed_index_ = forward_vector_index_ = -1;  // re-establish the bias on the next attempt
        pulse_index_ = -1;                     // and a pulse from cold
        if (!queue_.sleep_for(std::chrono::milliseconds(50 * attempt))) poll();
      }
    }
  }

  PointRow take(const Step& step) {
    PointRow p;
    p.kind = to_string(step.kind);
    p.set_value = step.set_value;
    const bool reverse = is_reverse(step.kind);
    p.set_unit = step.kind == Step::Kind::forward_vector || (!reverse && plan_.sweep.mode == SweepMode::current) ? "A" : "V";
    p.series = to_string(step.series);
    if (is_vector(step.kind)) {
      take_vector(step, p);
      p.t_s = unix_time_s();
      return p;
    }
    if (connected_slot_ != part_slot_) back_to_part();  // after the fixture's standards
    vector_level_set_ = false;  // the levels' amplitude goes on the generator below
    const bool levels = uses_siggen(step.kind);
    if (!levels && siggen_on_) {  // DC readings are taken with the generator off
      bench_.siggen->set_output(false);
      siggen_on_ = false;
    }
    if (step.kind == Step::Kind::reverse) {
      reverse_bias(step);
      read_dc(p);
    } else if (step.kind == Step::Kind::dc && step.series == Series::dwell) {
      dwell_reading(step, p);
    } else if (step.kind == Step::Kind::dc) {
      bias(step, p);
    } else {
      if (step.kind == Step::Kind::reverse_ac && reversed_index_ != step.dc_index) {
        reverse_bias(step);  // resumed into the off-state part of a reverse step
      } else if (step.kind == Step::Kind::ac && biased_index_ != step.dc_index) {
        PointRow scratch;
        bias(step, scratch);  // resumed into the AC part of a step: bias first
      }
      read_levels(step, p);
    }
    p.t_s = unix_time_s();
    return p;
  }

  void reverse_bias(const Step& step) {
    biased_index_ = -1;
    set_supply(step.set_value);  // negative: reverse bias; magnitude checked against max_reverse_v
    source_on();
    wait(plan_.sweep.settle_s);
    reversed_index_ = step.dc_index;
  }

  // The two level-meter channels at the step's frequency, generator on.
  void read_levels(const Step& step, PointRow& p) {
    const double amplitude = step.kind == Step::Kind::reverse_ac ? plan_.ac->off_state->amplitude : plan_.ac->amplitude;
    if (!siggen_on_ || amplitude != siggen_amplitude_) {
      bench_.siggen->set_amplitude(amplitude, plan_.ac->unit);
      siggen_amplitude_ = amplitude;
    }
    bench_.siggen->set_frequency_hz(step.freq_hz);
    if (!siggen_on_) {
      bench_.siggen->set_output(true);
      siggen_on_ = true;
    }
    wait(plan_.ac->settle_s);
    p.freq_hz = step.freq_hz;
    // Stored in the unit the meter measured (a Vrms-only meter under a Vpp
    // plan gives Vrms, labelled so; drivers/levels.hpp), never relabelled.
    const drivers::Level in = bench_.levelmeter->measure_level(1, plan_.ac->unit);
    const drivers::Level out = bench_.levelmeter->measure_level(2, plan_.ac->unit);
    if (in.unit != out.unit)
      throw drivers::DriverError(drivers::ErrorKind::config, std::string("levelmeter answered channel 1 in ") + drivers::to_string(in.unit) +
                                                                 " and channel 2 in " + drivers::to_string(out.unit));
    p.ac_unit = drivers::to_string(in.unit);
    p.ac_in_v = in.value;
    p.ac_out_v = out.value;
    p.supply_v = supply_v_;
  }

  // --- vector readings (plan.vector) ---------------------------------------

  // A standard's step: its slot connected with the supply off; a
  // reverse_vector step: the part's slot at the step's reverse bias; a
  // forward_vector step: the part's slot carrying the step's current. Then
  // the transfer at the step's frequency.
  void take_vector(const Step& step, PointRow& p) {
    if (!bench_.vectormeter || !bench_.siggen)
      throw JobStop{JobStop::Why::fault, "plan.vector needs a vectormeter and a siggen in the bench config (bench.vectormeter, bench.siggen)"};
    if (step.kind == Step::Kind::reverse_vector) {
      if (connected_slot_ != part_slot_) back_to_part();
      if (reversed_index_ != step.dc_index) reverse_bias(step);  // resumed into the vector part of a reverse step
    } else if (step.kind == Step::Kind::forward_vector) {
      if (connected_slot_ != part_slot_) back_to_part();
      if (forward_vector_index_ != step.dc_index) forward_vector_bias(step);
      // Each reading carries the DC reading that set its bias: the current
      // the part really carried (the fit's I) and its flags (a current limit
      // stops the forward steps, as in the sweep).
      p.v = forward_bias_.v;
      p.i_a = forward_bias_.i_a;
      p.flags |= forward_bias_.flags;
    } else {
      const int slot = step.kind == Step::Kind::vector_open ? plan_.vector->open_slot : plan_.vector->short_slot;
      if (connected_slot_ != slot) switch_slot(slot);
    }
    read_transfer(step, p);
  }

  // The supply in current mode at a forward_vector step's current, read
  // with the generator off (as every DC reading), as the sweep sets its
  // current steps (target_current: bounded corrections, the compliance).
  void forward_vector_bias(const Step& step) {
    if (siggen_on_) {
      bench_.siggen->set_output(false);
      siggen_on_ = false;
    }
    forward_bias_ = PointRow{};
    target_current(step.set_value, forward_bias_, false);
    biased_index_ = reversed_index_ = -1;
    forward_vector_index_ = step.dc_index;
  }

  // Relays are switched with no current flowing (the safety order): the
  // generator and the supply's output off, the supply at 0 V, then the slot.
  void switch_slot(int slot) {
    if (siggen_on_) {
      bench_.siggen->set_output(false);
      siggen_on_ = false;
    }
    end_pulse();  // supply output off
    set_supply(0.0);
    biased_index_ = reversed_index_ = -1;
    connected_slot_ = -1;  // unknown until the scanner has answered
    bench_.scanner->connect_slot(slot);
    connected_slot_ = slot;
  }

  // Back to the part's slot after the standards; the next step turns the
  // supply on again (source_on(): current limit first).
  void back_to_part() { switch_slot(part_slot_); }

  void read_transfer(const Step& step, PointRow& p) {
    const VectorSpec& v = *plan_.vector;
    if (!siggen_on_ || !vector_level_set_) {
      bench_.siggen->set_amplitude(v.amplitude, v.unit);
      vector_level_set_ = true;
      siggen_amplitude_ = kNaN;  // the level readings set theirs again
    }
    bench_.siggen->set_frequency_hz(step.freq_hz);
    if (!siggen_on_) {
      bench_.siggen->set_output(true);
      siggen_on_ = true;
    }
    wait(v.settle_s);
    const drivers::Transfer t = bench_.vectormeter->measure_transfer();
    p.freq_hz = step.freq_hz;
    p.ratio = t.ratio;
    p.phase_deg = t.phase_deg;
    p.supply_v = supply_v_;
  }

  // Programs the forward bias of a dc step and reads it into p (in a pulse
  // from cold for a pulsed step: the output stays on after the reading, for
  // the pulse's dwell readings; step_at ends the pulse).
  void bias(const Step& step, PointRow& p) {
    if (plan_.sweep.mode == SweepMode::voltage) {
      apply_bias(step.set_value, step.pulsed);
      read_dc(p);
    } else {
      target_current(step.set_value, p, step.pulsed);
    }
    biased_index_ = step.pulsed ? -1 : step.dc_index;  // a pulse leaves no held bias for AC readings
    reversed_index_ = -1;
    if (step.pulsed) pulse_index_ = step.dc_index;
  }

  // The supply at v and, after the wait, ready to read: held (settle_s) or
  // as a pulse from cold (output off for off_s, on, on_s).
  void apply_bias(double v, bool pulsed) {
    if (!pulsed) {
      set_supply(v);
      source_on();
      wait(plan_.sweep.settle_s);
      pulse_index_ = -1;
      return;
    }
    const HeatingSpec::Pulse& pulse = *plan_.heating.pulse;
    end_pulse();
    wait(pulse.off_s);
    set_supply(v);
    // The safety order holds for every output on, a pulse's too: the
    // current limit is programmed again since the output went off.
    bench_.source->set_current_limit_a(compliance_a(plan_, cfg_));
    const auto before = Clock::now();
    bench_.source->set_output(true);
    source_on_ = true;
    const auto after = Clock::now();
    pulse_start_ = before + (after - before) / 2;  // the command's midpoint: when the part saw it, within half its time
    pulse_index_ = -2;                             // a pulse without its step yet (bias() sets it)
    wait_until_dwell(pulse.on_s);
  }

  // A dwell reading of the pulse of its step, at dwell_s after the output
  // went on. Resumed or retried into it: a new pulse from cold first.
  void dwell_reading(const Step& step, PointRow& p) {
    if (pulse_index_ != step.dc_index) {
      PointRow scratch;
      Step first = step;
      first.series = Series::up;
      bias(first, scratch);
    }
    wait_until_dwell(step.dwell_s);
    read_dc(p);
  }

  void wait_until_dwell(double dwell_s) {
    const double elapsed = std::chrono::duration<double>(Clock::now() - pulse_start_).count();
    wait(dwell_s - elapsed);
  }

  // The supply's output off between pulses (the safety order keeps the
  // current limit and the scanner as they are; the next step turns it on).
  void end_pulse() {
    forward_vector_index_ = -1;
    if (source_on_) {
      bench_.source->set_output(false);
      source_on_ = false;
    }
    pulse_index_ = -1;
  }

  void source_on() {
    if (!source_on_) {
      bench_.source->set_current_limit_a(compliance_a(plan_, cfg_));  // before output on, always
      bench_.source->set_output(true);
      source_on_ = true;
    }
  }

  // Sets the supply so that the part carries target_a: a first guess from
  // the last step's Vf, then secant corrections on (supply, current), or the
  // fixture resistance plus a generous junction rd ≈ 2·Vt/I before two
  // readings differ. Each correction is bounded: at most kMaxTargetStepV
  // either way, so a part whose Vf is far above the guess (a series stack, a
  // high-N part) is approached in steps and not by one jump (was: straight to
  // max_supply_v, into the current limit, which ended the part's forward
  // sweep); and never up by more than r·((1 − tolerance)·compliance − I): the
  // current rises by at most 1/r per volt (the junction's rd only adds to r),
  // so no reading reaches the plan's compliance on the way. A bounded step
  // does not count as one of the kTargetIterations corrections (at most
  // kMaxTargetReadings readings in all), so a part that needs no bound is
  // measured exactly as before.
  void target_current(double target_a, PointRow& p, bool pulsed) {
    const double r = cfg_.fixture.bias_resistor_ohm + cfg_.fixture.dc_return_ohm;
    const double up_room_a = (1.0 - kTargetTolerance) * compliance_a(plan_, cfg_);
    double v_set = target_a * r + vf_guess_v_;
    double prev_v = NAN, prev_i = NAN;
    int budget = kTargetIterations;
    for (int k = 0; k < budget && k < kMaxTargetReadings; ++k) {
      apply_bias(v_set, pulsed);  // each correction of a pulsed step is a pulse from cold
      read_dc(p);
      if (p.flags & kLimitFlags) return;
      if (std::fabs(p.i_a - target_a) <= kTargetTolerance * target_a) break;
      double slope = 0;
      if (std::isfinite(prev_v) && std::fabs(p.i_a - prev_i) > 1e-12 && std::fabs(v_set - prev_v) > 1e-9)
        slope = (p.i_a - prev_i) / (v_set - prev_v);
      if (!(slope > 0)) slope = 1.0 / (r + 0.05 / std::max(std::fabs(p.i_a), 1e-9));
      prev_v = v_set;
      prev_i = p.i_a;
      const double step = (target_a - p.i_a) / slope;
      const double up_bound = std::min(kMaxTargetStepV, std::max(0.0, r * (up_room_a - p.i_a)));
      const double bounded = std::clamp(step, -kMaxTargetStepV, up_bound);
      if (bounded != step) ++budget;
      v_set = std::clamp(v_set + bounded, 0.0, cfg_.safety.max_supply_v);
    }
    if (std::fabs(p.i_a - target_a) > kOffTarget * target_a) p.flags |= flag_off_target;
    if (std::isfinite(p.v)) vf_guess_v_ = p.v;
  }

  // Never programs beyond the limits, whatever the plan said.
  void set_supply(double v) {
    const double hi = cfg_.safety.max_supply_v, lo = -std::min(cfg_.safety.max_reverse_v, cfg_.safety.max_supply_v);
    v = std::clamp(v, lo, hi);
    forward_vector_index_ = -1;  // forward_vector_bias sets it again once its current is reached
    bench_.source->set_voltage_v(v);
    supply_v_ = v;
  }

  // A reading in a pulse carries its dwell: output on → the voltage
  // readings' midpoints (the voltage is what the dwells compare; the meter
  // reads when the query arrives, within half its round trip of the midpoint).
  void read_dc(PointRow& p) {
    double v_sum = 0, i_sum = 0, t_sum_s = 0;
    const int n = plan_.sweep.average;
    for (int k = 0; k < n; ++k) {
      const auto before = Clock::now();
      v_sum += bench_.meter->measure_dc_voltage_v();
      const auto after = Clock::now();
      t_sum_s += std::chrono::duration<double>(before + (after - before) / 2 - pulse_start_).count();
      i_sum += cfg_.fixture.current_from == CurrentFrom::source ? bench_.source->measure_current_a() : bench_.meter->measure_dc_current_a();
    }
    p.v = v_sum / n;
    p.i_a = i_sum / n;
    if (pulse_index_ != -1 && source_on_) p.dwell_s = t_sum_s / n;
    p.supply_v = supply_v_;
    if (bench_.source->in_current_limit()) p.flags |= flag_current_limit;
    if (std::fabs(p.v * p.i_a) > cfg_.safety.max_power_w) p.flags |= flag_power_limit;
  }

  void wait(double s) {
    if (s > 0 && !queue_.sleep_for(std::chrono::duration<double>(s))) poll();
  }

  // --- control, faults, events ---------------------------------------------

  void poll() {
    switch (queue_.control()) {
      case Control::none: break;
      case Control::pause: throw JobStop{JobStop::Why::pause, "paused by request"};
      case Control::cancel: throw JobStop{JobStop::Why::cancel, "cancelled by request"};
      case Control::shutdown: throw JobStop{JobStop::Why::shutdown, "daemon shutting down"};
    }
    if (Clock::now() > deadline_) {
      std::ostringstream os;
      os << "job exceeded safety limit max_job_s = " << cfg_.safety.max_job_s << " s";
      throw JobStop{JobStop::Why::timeout, os.str()};
    }
  }

  // Bench commands outside a reading: retried like readings, then a fault.
  template <typename F>
  void guarded(F&& f) {
    for (int attempt = 1;; ++attempt) {
      try {
        f();
        return;
      } catch (const drivers::DriverError& e) {
        if (e.permanent() || attempt >= kPointAttempts)
          throw JobStop{JobStop::Why::fault, describe(e) + " (part " + part_label_ + ")"};
        queue_.sleep_for(std::chrono::milliseconds(50 * attempt));
      }
    }
  }

  void check(const std::string& errors, const char* what) {
    if (!errors.empty()) throw JobStop{JobStop::Why::fault, std::string(what) + ": " + errors};
  }

  void publish_point(const PointRow& p) {
    Json d = to_json(p);
    d["job_id"] = job_id_;
    d["part_id"] = part_id_;
    d["part"] = part_label_;
    events_.publish({"point.added", std::move(d)});
  }

  void publish_progress() {
    const double elapsed = std::chrono::duration<double>(Clock::now() - started_).count();
    const long remaining = std::max(0L, points_total_ - points_done_ - skipped_);
    const Json eta = taken_ > 0 ? Json(elapsed / static_cast<double>(taken_) * static_cast<double>(remaining)) : Json(nullptr);
    events_.publish({"job.progress",
                     {{"job_id", job_id_}, {"points_done", points_done_}, {"points_total", points_total_}, {"eta_s", eta}, {"part", part_label_}}});
  }

  // The run's fit and its end, one transaction (Store::finish_run_with_fit):
  // a kill leaves the run either done with its fit or not done, and a run
  // not done is fitted when the resumed job reaches it. A failed fit is
  // stored with its reason; a StoreError goes up (the job pauses).
  void fit_and_finish(Id part_id, Id run_id, const RunFixture& fixture, double temp_k) {
    const RunFit f = fit_run(cfg_, temp_k, fixture, store_.points(run_id), plan_.part_type);
    store_.finish_run_with_fit(part_id, run_id, f.fit, f.cap_report ? &*f.cap_report : nullptr, f.electrothermal ? &*f.electrothermal : nullptr, f.more);
    log_("job " + std::to_string(job_id_) + " part " + part_label_ + ": " + describe_fit(f));
  }

  const Config& cfg_;
  Store& store_;
  JobQueue& queue_;
  EventBus& events_;
  Bench& bench_;
  const LogFn& log_;
  Id job_id_;
  const Plan& plan_;
  std::vector<Step> steps_;
  long points_done_, points_total_;
  long taken_ = 0, skipped_ = 0;
  Clock::time_point started_, deadline_;
  std::vector<PointRow> pending_;  // readings of the current bias step, not yet committed
  std::string part_label_;
  Id part_id_ = 0, run_id_ = 0;
  bool stopped_high_ = false, siggen_on_ = false;
  bool source_on_ = true;     // the supply's output as last programmed in this part
  int pulse_index_ = -1;      // the forward step whose pulse is on (-2: being set up), -1 = none
  Clock::time_point pulse_start_{};
  int biased_index_ = -1;    // the forward step the supply is at, -1 = none or unknown
  int reversed_index_ = -1;  // the reverse_v point the supply is at, -1 = none or unknown
  int forward_vector_index_ = -1;  // the forward_i_a current the supply carries, -1 = none or unknown
  PointRow forward_bias_;          // the DC reading that set it
  double siggen_amplitude_ = 0;  // as last programmed (valid while siggen_on_)
  bool vector_level_set_ = false;  // the generator carries plan.vector's amplitude (valid while siggen_on_)
  int part_slot_ = 0, connected_slot_ = 0;  // the part's slot, and the one the scanner connects (a standard's, -1 unknown)
  double supply_v_ = 0, vf_guess_v_ = kFirstVfGuessV;
};

}  // namespace

Executor::Executor(const Config& config, Store& store, JobQueue& queue, EventBus& events, BenchOpener open, LogFn log)
    : config_(config), store_(store), queue_(queue), events_(events), open_(std::move(open)), log_(std::move(log)) {}

Executor::~Executor() { stop(); }

SafeStart make_bench_safe_first(const Config& config, const BenchOpener& open, const LogFn& log) {
  SafeStart out;
  try {
    out.bench = open(config);
    out.bench->log = log;
  } catch (const std::exception& e) {
    out.errors = std::string("cannot open: ") + e.what();
    log.error("bench: " + out.errors + " (outputs not known to be off; retrying every " + std::to_string(kMakeSafeRetry.count()) + " ms)");
    return out;
  }
  // Stale errors first, so none is reported against OUTP OFF; a failure to
  // clear is not fatal here (make_safe() reports the instrument's state).
  const std::string clear_first = out.bench->clear_errors("at bench open", Bench::Roles::make_safe);
  out.errors = out.bench->make_safe();
  // No job runs yet: the chamber goes to its idle set point (bench.hpp park_chamber).
  if (const std::string parked = out.bench->park_chamber(config.safety.chamber_idle_k); !parked.empty())
    out.errors += (out.errors.empty() ? "" : "; ") + parked;
  const std::string clear_then = out.bench->clear_errors("at bench open", Bench::Roles::others);
  if (!clear_first.empty() || !clear_then.empty())
    log.warn("bench: could not clear every error queue at open: " + clear_first + (clear_first.empty() || clear_then.empty() ? "" : "; ") + clear_then);
  std::string missing;
  for (const auto& m : out.bench->missing) missing += (missing.empty() ? "" : "; ") + m;
  if (!missing.empty()) out.errors = "cannot open: " + missing + (out.errors.empty() ? "" : "; also: " + out.errors);
  if (out.errors.empty()) log.info("bench: every output off, scanner open");
  else log.error("bench: could not make every instrument safe at start: " + out.errors + " (retrying every " +
           std::to_string(kMakeSafeRetry.count()) + " ms)");
  return out;
}

void Executor::adopt_safe_start(SafeStart start) {
  if (!start.bench || !start.bench->missing.empty()) {
    // What answered is off; the missing ones may still be on: the executor
    // thread reopens and retries (a previous daemon may have left one on).
    unsafe_ = true;
    unsafe_errors_ = start.errors;
    set_bench_problem(start.errors.empty() ? "" : "bench: " + start.errors);
    return;
  }
  bench_ = std::move(start.bench);
  bench_->log = log_;
  bench_open_ = true;
  note_safety(start.errors);
  identify();  // the error queues were cleared by make_bench_safe_first()
}

void Executor::start() {
  if (!thread_.joinable()) thread_ = std::thread([this] { loop(); });
}

void Executor::stop() {
  queue_.stop();
  if (thread_.joinable()) thread_.join();
  if (!bench_) return;
  const std::string errors = make_safe_and_park();
  note_safety(errors);
  if (!errors.empty()) log_.error("bench: could not make every instrument safe at shutdown: " + errors);
}

Json Executor::identities() const {
  std::lock_guard lock(ident_mutex_);
  return identities_;
}

bool Executor::ensure_bench() {
  if (bench_) return true;
  try {
    auto opened = open_(config_);
    opened->log = log_;
    if (!opened->missing.empty()) {
      // Make safe what answers, then give the rest back: no job on a partial bench.
      const std::string errors = opened->make_safe();
      std::string why;
      for (const auto& m : opened->missing) why += (why.empty() ? "" : "; ") + m;
      // The missing ones may still be on: a safety failure.
      log_bench_problem(LogLevel::error, "bench: cannot open: " + why + (errors.empty() ? " (the others are safe)" : "; also: " + errors));
      unsafe_ = true;  // the missing ones may still be on: keep retrying
      unsafe_errors_ = why;
      return false;
    }
    bench_ = std::move(opened);
    bench_->log = log_;
    bench_open_ = true;
    set_bench_problem("");
    identify();
    // An error someone else left in a queue must not be blamed on our first
    // command; a failure here shows again at the next command, so only logged.
    if (const std::string errors = bench_->clear_errors("at bench open"); !errors.empty())
      log_.warn("bench: could not clear every error queue at open: " + errors);
    return true;
  } catch (const std::exception& e) {
    log_bench_problem(LogLevel::warn, std::string("bench: cannot open: ") + e.what());
    bench_.reset();
    bench_open_ = false;
    return false;
  }
}

void Executor::drop_bench() {
  if (bench_) note_safety(bench_->make_safe());
  bench_.reset();
  bench_open_ = false;
}

void Executor::set_bench_problem(const std::string& line) {
  std::lock_guard lock(problem_mutex_);
  last_bench_problem_ = line;
}

std::string Executor::bench_problem() const {
  std::lock_guard lock(problem_mutex_);
  return last_bench_problem_;
}

void Executor::log_bench_problem(LogLevel level, const std::string& line) {
  if (line == bench_problem()) return;
  set_bench_problem(line);
  log_.write(level, line);
}

void Executor::note_safety(const std::string& errors) {
  if (errors.empty()) {
    unsafe_ = false;
    unsafe_errors_.clear();
    return;
  }
  unsafe_ = true;
  unsafe_errors_ = errors;  // already logged by the caller; a retry logs only a different outcome
}

// One make-safe attempt while no job runs (the bench is not known safe):
// every instrument is tried (Bench::make_safe), the outcome logged once per change.
std::string Executor::make_safe_and_park() {
  std::string errors = bench_->make_safe();
  if (const std::string parked = bench_->park_chamber(config_.safety.chamber_idle_k); !parked.empty())
    errors += (errors.empty() ? "" : "; ") + parked;
  return errors;
}

void Executor::retry_make_safe() {
  if (!ensure_bench()) return;  // "cannot open" logged once by ensure_bench
  const std::string errors = bench_->make_safe();
  if (errors.empty()) {
    note_safety(errors);
    set_bench_problem("");
    log_("bench: every output off, scanner open (make-safe retried)");
    return;
  }
  if (errors != unsafe_errors_) log_.error("bench: still not safe, retrying every " + std::to_string(kMakeSafeRetry.count()) + " ms: " + errors);
  note_safety(errors);
}

void Executor::stop_job(Id id, JobState state, const std::optional<std::string>& message) {
  if (!queue_.set_stop_state(id, state, message))
    log_.warn("job " + std::to_string(id) + ": state " + std::string(to_string(state)) + " could not be saved, held in memory" + (message ? ": " + *message : ""));
}

void Executor::identify() {
  // Two different failures, worded apart: the instrument not answering
  // *IDN?, and the store not keeping what it answered.
  auto one = [&](const char* role, drivers::Instrument* inst) {
    if (!inst) return;
    drivers::Identity id;
    try {
      id = inst->identify();
    } catch (const std::exception& e) {
      log_.warn(std::string("bench: ") + role + " *IDN? failed: " + e.what());
      return;
    }
    note_identity(role, id);
    try {
      const auto* ic = config_.instrument(role);
      store_.record_instrument(role, ic ? ic->address : "", id.manufacturer, id.model, id.serial, id.firmware);
    } catch (const std::exception& e) {
      log_.warn(std::string("bench: ") + role + " identified as " + id.manufacturer + " " + id.model +
           ", but storing its identity failed: storage: " + e.what());
    }
  };
  one("source", bench_->source.get());
  one("meter", bench_->meter.get());
  one("scanner", bench_->scanner.get());
  one("siggen", bench_->siggen.get());
  one("levelmeter", bench_->levelmeter.get());
  one("chamber", bench_->chamber.get());
  one("vectormeter", bench_->vectormeter.get());
}

void Executor::note_identity(const std::string& role, const drivers::Identity& id) {
  {
    std::lock_guard lock(ident_mutex_);
    identities_[role] = {{"manufacturer", id.manufacturer}, {"model", id.model}, {"serial", id.serial}, {"firmware", id.firmware}};
  }
  const std::string idn = id.manufacturer + "," + id.model + "," + id.serial + "," + id.firmware;
  if (logged_identity_[role] == idn) return;  // reopened, same instrument: said already
  logged_identity_[role] = idn;
  const auto* ic = config_.instrument(role);
  log_("bench: " + role + " is " + idn + (ic ? " at " + ic->address + " (dialect " + ic->dialect_path.filename().string() + ")" : ""));
}

namespace {

double seconds_since(Clock::time_point t0) { return std::chrono::duration<double>(Clock::now() - t0).count(); }

Json identity_json(const drivers::Identity& id) {
  return {{"manufacturer", id.manufacturer}, {"model", id.model}, {"serial", id.serial}, {"firmware", id.firmware},
          {"idn", id.manufacturer + "," + id.model + "," + id.serial + "," + id.firmware}};
}

// The readings of one instrument in the bench check. After a reading that
// timed out the rest are not tried: an instrument that went mute after its
// *IDN? costs one reply timeout, not one per reading.
struct CheckReadings {
  Json out = Json::array();
  bool mute = false;

  // One reading: a number with its unit, or the instrument's text, or why it
  // could not be taken.
  template <typename F>
  void take(const char* name, const char* unit, F&& read) {
    Json r{{"name", name}};
    if (mute) {
      r["error"] = "not tried: the instrument stopped answering";
    } else {
      try {
        read(r);
        if (unit) r["unit"] = unit;
      } catch (const drivers::DriverError& e) {
        r["error"] = e.what();
        mute = e.kind() == drivers::ErrorKind::timeout;
      } catch (const std::exception& e) {
        r["error"] = e.what();
      }
    }
    out.push_back(std::move(r));
  }
};

// What the check reads from each role: queries only, nothing that switches
// or programs anything (the outputs stay as they are, normally off).
Json role_readings(const std::string& role, Bench& b) {
  CheckReadings readings;
  Json& out = readings.out;
  auto reading = [&](const char* name, const char* unit, auto&& read) { readings.take(name, unit, read); };
  auto state = [&](const char* name, drivers::Instrument& inst) {
    reading(name, nullptr, [&](Json& r) {
      const auto text = inst.query_state();
      r["text"] = text ? Json(*text) : Json(nullptr);
      if (!text) r["note"] = "the dialect has no query_state";
    });
  };
  if (role == "source" && b.source) {
    state("output state", *b.source);
    reading("voltage readback", "V", [&](Json& r) { r["value"] = b.source->measure_voltage_v(); });
    reading("current readback", "A", [&](Json& r) { r["value"] = b.source->measure_current_a(); });
  } else if (role == "meter" && b.meter) {
    reading("dc voltage", "V", [&](Json& r) { r["value"] = b.meter->measure_dc_voltage_v(); });
  } else if (role == "scanner" && b.scanner) {
    state("channel state", *b.scanner);
  } else if (role == "siggen" && b.siggen) {
    state("output state", *b.siggen);
    out.push_back({{"name", "amplitude unit"}, {"text", b.siggen->amplitude_units()}});
  } else if (role == "levelmeter" && b.levelmeter) {
    reading("level channel 1", nullptr, [&](Json& r) {
      const drivers::Level l = b.levelmeter->measure_level(1, drivers::LevelUnit::vrms);
      r["value"] = l.value;
      r["unit"] = drivers::to_string(l.unit);
    });
    out.push_back({{"name", "reads"}, {"text", b.levelmeter->level_units()}});
  } else if (role == "vectormeter" && b.vectormeter) {
    // No query: MEAS:RAT? needs the generator's reference, which the check
    // never turns on (it changes nothing); *IDN? above is its answer.
    out.push_back({{"name", "reads"}, {"text", "complex transfer ch2/ch1 (ratio, phase), generator on only"}});
  } else if (role == "chamber" && b.chamber) {
    reading("temperature readback", "K", [&](Json& r) { r["value"] = b.chamber->measure_temperature_k(); });
  }
  return out;
}

}  // namespace

Json Executor::known_bench(const char* why) const {
  Json instruments = Json::array();
  const Json ids = identities();
  for (const auto& [role, ic] : config_.bench) {
    Json id = ids.contains(role) ? ids[role] : Json(nullptr);
    if (id.is_object())
      id["idn"] = id.value("manufacturer", "") + "," + id.value("model", "") + "," + id.value("serial", "") + "," + id.value("firmware", "");
    instruments.push_back({{"role", role}, {"address", ic.address}, {"dialect", ic.dialect_path.filename().string()},
                           {"identity", id}, {"readings", Json::array()}, {"problem", nullptr}, {"elapsed_s", 0.0}});
  }
  const std::string problem = bench_problem();
  return {{"checked", false}, {"note", why}, {"bench_open", bench_open()},
          {"bench_problem", problem.empty() ? Json(nullptr) : Json(problem)}, {"instruments", instruments}};
}

Json Executor::check_bench() {
  const auto t0 = Clock::now();
  // Generous upper bound of one check: every instrument mute (connect +
  // one reply), plus the bench's reopen afterwards with its own timeouts.
  const auto per = kCheckConnectTimeout + 4 * kCheckReplyTimeout;
  auto limit = per * static_cast<long>(config_.bench.size()) + std::chrono::seconds(2);
  for (const auto& [role, ic] : config_.bench)
    limit += std::chrono::milliseconds(static_cast<long>(ic.reply_timeout_ms) * (1 + ic.max_retries) + ic.connect_timeout_ms);
  std::unique_lock lock(check_mutex_);
  const long ticket = check_started_ + 1;  // a check not yet started serves every caller waiting for it
  check_asked_ = std::max(check_asked_, ticket);
  queue_.nudge();
  while (check_done_ < ticket) {
    if (check_started_ < ticket) {
      if (const auto job = queue_.running()) {
        Json out = known_bench("a job holds the bench: showing what is known, nothing was asked of the instruments");
        out["held_by_job"] = *job;
        return out;
      }
    }
    if (Clock::now() - t0 > limit)
      throw RequestError(RpcCode::unavailable, "bench check: no answer from the executor within " +
                                                      std::to_string(std::chrono::duration_cast<std::chrono::seconds>(limit).count()) + " s");
    check_cv_.wait_for(lock, std::chrono::milliseconds(100));
    queue_.nudge();  // in case the executor was between waits when asked
  }
  Json out = check_result_;
  out["held_by_job"] = nullptr;
  return out;
}

void Executor::serve_check() {
  long ticket;
  {
    std::lock_guard lock(check_mutex_);
    if (check_asked_ <= check_done_) return;
    ticket = check_started_ = check_asked_;
  }
  Json result;
  try {
    result = run_check();
  } catch (const std::exception& e) {
    result = known_bench("the check itself failed");
    result["bench_problem"] = std::string("bench check failed: ") + e.what();
  }
  {
    std::lock_guard lock(check_mutex_);
    check_result_ = std::move(result);
    check_done_ = ticket;
  }
  check_cv_.notify_all();
}

// Executor thread, no job running. Each instrument is opened on its own
// (a one-instrument copy of the config, check timeouts, no retries) so one
// mute instrument costs its own timeout only, and its time is measured.
Json Executor::run_check() {
  const auto t0 = Clock::now();
  const bool was_open = bench_ != nullptr;
  // Many instruments take one link at a time: close ours first. The idle
  // bench was made safe after its last job; nothing is switched here.
  bench_.reset();
  bench_open_ = false;
  Json instruments = Json::array();
  for (const auto& [role, ic] : config_.bench) {
    const auto ti = Clock::now();
    Config one = config_;
    InstrumentConfig quick = ic;
    quick.reply_timeout_ms = std::min<int>(ic.reply_timeout_ms, static_cast<int>(kCheckReplyTimeout.count()));
    quick.connect_timeout_ms = std::min<int>(ic.connect_timeout_ms, static_cast<int>(kCheckConnectTimeout.count()));
    quick.max_retries = 0;
    one.bench = {{role, quick}};
    Json entry{{"role", role}, {"address", ic.address}, {"dialect", ic.dialect_path.filename().string()},
               {"identity", nullptr}, {"readings", Json::array()}, {"problem", nullptr}};
    try {
      auto b = open_(one);
      b->log = log_;
      if (!b->missing.empty()) {
        const std::string detail = b->missing.front().substr(role.size() + 2);  // "role: ..." from open_bench
        const auto why = b->missing_why.find(role);
        entry["problem"] = (why != b->missing_why.end() ? why->second + ": " : std::string()) + detail;
      } else {
        drivers::Instrument* inst = role == "source"    ? static_cast<drivers::Instrument*>(b->source.get())
                                    : role == "meter"   ? static_cast<drivers::Instrument*>(b->meter.get())
                                    : role == "scanner" ? static_cast<drivers::Instrument*>(b->scanner.get())
                                    : role == "siggen"  ? static_cast<drivers::Instrument*>(b->siggen.get())
                                    : role == "chamber" ? static_cast<drivers::Instrument*>(b->chamber.get())
                                    : role == "vectormeter" ? static_cast<drivers::Instrument*>(b->vectormeter.get())
                                                        : static_cast<drivers::Instrument*>(b->levelmeter.get());
        if (inst) {
          const drivers::Identity id = inst->identify();  // asked at open; not asked again
          entry["identity"] = identity_json(id);
          note_identity(role, id);
          entry["readings"] = role_readings(role, *b);
        }
      }
    } catch (const std::exception& e) {
      entry["problem"] = std::string("cannot be opened: ") + e.what();
    }
    entry["elapsed_s"] = seconds_since(ti);
    instruments.push_back(std::move(entry));
  }
  // Back to the bench jobs use, with the config's own timeouts, when every
  // instrument answered; else it stays closed with the reason (opening it now
  // would wait out the config's timeouts and retries on the mute one), and
  // the next job or make-safe retry opens it as usual.
  std::string failed;
  for (const auto& inst : instruments)
    if (inst["problem"].is_string()) failed += (failed.empty() ? "" : "; ") + inst["role"].get<std::string>() + ": " + inst["problem"].get<std::string>();
  if (failed.empty()) ensure_bench();
  else if (was_open) log_bench_problem(LogLevel::warn, "bench: cannot open: " + failed + " (found by the bench check; opened again at the next job or bench check)");
  const std::string problem = bench_problem();
  return {{"checked", true},
          {"bench_open", bench_open()},
          {"bench_problem", problem.empty() ? Json(nullptr) : Json(problem)},
          {"instruments", instruments},
          {"timeouts_ms", {{"connect", kCheckConnectTimeout.count()}, {"reply", kCheckReplyTimeout.count()}}},
          {"elapsed_s", seconds_since(t0)}};
}

// Runs a previous juncod marked done without storing their fit (before run
// end and fit were one transaction) get it now, from their stored readings,
// before any job runs. A storage failure is logged; the next start retries.
void Executor::refit_runs_without_fit() {
  try {
    for (const auto& run : store_.runs_without_fit(std::nullopt, true)) {
      const auto job = store_.job(run.job_id);
      const double temp_k = std::isfinite(run.temp_k) ? run.temp_k : job ? job->plan.temp_k : 300.15;
      const RunFit f = fit_run(config_, temp_k, run.fixture, store_.points(run.id), job ? job->plan.part_type : "junction");
      store_.finish_run_with_fit(run.part_id, run.id, f.fit, f.cap_report ? &*f.cap_report : nullptr, f.electrothermal ? &*f.electrothermal : nullptr, f.more);
      log_("recovered: run " + std::to_string(run.id) + " of job " + std::to_string(run.job_id) +
           " was done without its fit; fitted now: " + describe_fit(f));
    }
  } catch (const std::exception& e) {
    log_.warn(std::string("recovering fits of done runs failed: ") + e.what());
  }
}

void Executor::loop() {
  refit_runs_without_fit();
  for (;;) {
    // While the bench is not known safe, wake every kMakeSafeRetry to try again.
    const auto id = unsafe_ ? queue_.wait_next_for(kMakeSafeRetry) : queue_.wait_next();
    if (queue_.stopping()) break;
    serve_check();  // asked for by bench.check (queue_.nudge()); before any job claims the bench
    if (!id) {
      if (unsafe_) retry_make_safe();
      continue;
    }
    if (reopen_before_job_) {
      drop_bench();  // reconnect and re-identify after an instrument fault
      reopen_before_job_ = false;
    }
    if (!ensure_bench()) {
      // Leave the job queued; try again shortly unless we are stopping.
      queue_.sleep_for(std::chrono::seconds(2));
      continue;
    }
    bool claimed = false;
    try {
      claimed = queue_.claim(*id);
    } catch (const StoreError& e) {
      log_bench_problem(LogLevel::warn, "job " + std::to_string(*id) + ": cannot start: storage: " + e.what());
      queue_.sleep_for(std::chrono::seconds(2));
      continue;
    }
    if (!claimed) continue;
    try {
      run_job(*id);
    } catch (const std::exception& e) {
      // A bug: never leave the bench live.
      if (bench_) note_safety(make_safe_and_park());
      log_.error("job " + std::to_string(*id) + ": failed: " + e.what());
      stop_job(*id, JobState::failed, e.what());
    }
    queue_.set_running(std::nullopt);
  }
}

void Executor::run_job(Id id) {
  const auto row = store_.job(id);
  if (!row) throw NotFound("no job " + std::to_string(id), "job_id", id);
  const Plan& plan = row->plan;
  log_("job " + std::to_string(id) + ": running (" + std::to_string(row->points_done) + " of " + std::to_string(row->points_total) +
       " points already committed)");
  JobRun run(config_, store_, queue_, events_, *bench_, log_, id, plan, row->points_done, row->points_total);
  try {
    // Errors someone else left queued would be reported against our commands.
    if (const std::string errors = bench_->clear_errors("before job " + std::to_string(id)); !errors.empty())
      throw JobStop{JobStop::Why::fault, "clearing the instruments' error queues: " + errors};
    run.run_all_parts();
    const std::string errors = make_safe_and_park();
    note_safety(errors);
    // Done means every part has its fit (a failed one with its reason); by
    // construction it has, checked here so a lapse can never pass as done.
    std::string unfitted;
    for (const auto& r : store_.runs_without_fit(id, false)) unfitted += (unfitted.empty() ? "" : ", ") + std::to_string(r.id);
    if (!unfitted.empty()) {
      const std::string msg = "runs " + unfitted + " have readings but no fit";
      log_.warn("job " + std::to_string(id) + ": failed: " + msg);
      stop_job(id, JobState::failed, msg);
      return;
    }
    // "" clears a message left from before (paused by request, restarted …).
    stop_job(id, JobState::done, errors.empty() ? std::string() : "finished, but: " + errors);
    if (errors.empty()) log_.info("job " + std::to_string(id) + ": done");
    else log_.error("job " + std::to_string(id) + ": done, but the outputs are not known to be off: " + errors);
  } catch (const JobStop& stop) {
    const std::string errors = make_safe_and_park();
    note_safety(errors);
    const std::string msg = stop.message + (errors.empty() ? "" : "; " + errors);
    // A requested stop is lifecycle, a fault or timeout a warning, and a
    // make-safe that failed on the way out a safety failure.
    const bool asked = stop.why == JobStop::Why::pause || stop.why == JobStop::Why::cancel || stop.why == JobStop::Why::shutdown;
    log_.write(!errors.empty() ? LogLevel::error : asked ? LogLevel::info : LogLevel::warn, "job " + std::to_string(id) + ": " + msg);
    switch (stop.why) {
      case JobStop::Why::pause: stop_job(id, JobState::paused, msg); break;
      case JobStop::Why::fault:
        stop_job(id, JobState::paused, msg);
        // The drivers reconnect by themselves; the bench is kept for the
        // make-safe retries and reopened before the next job.
        reopen_before_job_ = true;
        break;
      case JobStop::Why::cancel: stop_job(id, JobState::cancelled, msg); break;
      case JobStop::Why::timeout: stop_job(id, JobState::failed, msg); break;
      case JobStop::Why::shutdown:
        // As after a crash: resumable jobs go back to the queue on restart.
        stop_job(id, plan.resume ? JobState::queued : JobState::interrupted, msg);
        break;
    }
  } catch (const StoreError& e) {
    // A commit failed (read-only file, disk full): nothing more can be kept,
    // so the job stops here with the outputs off. Paused, not failed: once
    // the storage is fixed it can be resumed (after a restart the file's
    // "running" is recovered as usual).
    const std::string errors = make_safe_and_park();
    note_safety(errors);
    const std::string msg = std::string("storage: ") + e.what() + (errors.empty() ? "" : "; " + errors);
    log_.write(errors.empty() ? LogLevel::warn : LogLevel::error, "job " + std::to_string(id) + ": " + msg);
    stop_job(id, JobState::paused, msg);
  }
}

}  // namespace junco::daemon
