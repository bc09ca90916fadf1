#include "daemon/core_service.hpp"

#include "daemon/api_json.hpp"
#include "daemon/bench.hpp"
#include "daemon/error_codes.hpp"
#include "daemon/event_bus.hpp"
#include "daemon/executor.hpp"
#include "daemon/lab_publisher.hpp"
#include "daemon/part_analysis.hpp"
#include "daemon/part_export.hpp"
#include "daemon/jobs.hpp"
#include "daemon/methods.hpp"
#include "daemon/plan.hpp"
#include "daemon/plan_estimate.hpp"
#include "daemon/service_params.hpp"
#include "daemon/store.hpp"
#include "fitting/derived.hpp"
#include "formats/fit_json.hpp"
#include "formats/lot_nominal.hpp"
#include "formats/model_document.hpp"
#include "formats/spice_card.hpp"
#include "design/worst_case.hpp"
#include "formats/touchstone.hpp"
#include "junco/version.hpp"

#include <chrono>
#include <iostream>
#include <map>
#include <memory>
#include <mutex>
#include <unordered_map>
#include <utility>

namespace junco::daemon {

namespace {

// ---- params helpers: each names the field it rejects ----------------------

Id id_param(const Json& params, const char* key) {
  if (!params.is_object() || !params.contains(key))
    throw RequestError(RpcCode::invalid_params, std::string(key) + ": missing (required)", Json{{"field", key}});
  const Json& v = params.at(key);
  if (!v.is_number_integer() || v.get<long long>() < 1)
    throw RequestError(RpcCode::invalid_params, std::string(key) + ": must be a positive integer", Json{{"field", key}});
  return v.get<Id>();
}

std::optional<Id> opt_id_param(const Json& params, const char* key) {
  if (!params.is_object() || !params.contains(key) || params.at(key).is_null()) return std::nullopt;
  return id_param(params, key);
}

std::optional<std::string> opt_string_param(const Json& params, const char* key) {
  if (!params.is_object() || !params.contains(key) || params.at(key).is_null()) return std::nullopt;
  const Json& v = params.at(key);
  if (!v.is_string()) throw RequestError(RpcCode::invalid_params, std::string(key) + ": must be a string, not " + v.type_name(), Json{{"field", key}});
  return v.get<std::string>();
}

class CoreService final : public Service {
 public:
  CoreService(const Config& config, ServiceOptions options)
      : config_(config),
        log_(options.log ? std::move(options.log) : stderr_log("juncod", LogLevel::info, LogFormat::timestamped)),
        open_bench_(options.open_bench ? std::move(options.open_bench)
                                       : BenchOpener([this](const Config& c) { return open_bench(c, log_); })),
        // Outputs off before the store is opened: opening a huge database
        // takes seconds and a damaged one throws, and neither may hold an
        // output on (members are built in declaration order).
        safe_start_(make_bench_safe_first(config_, open_bench_, log_)),
        store_(open_store(config_, log_)),
        lab_(config_.paths.database, config_.lab, log_),
        queue_(store_, events_),
        executor_(config_, store_, queue_, events_, open_bench_, log_),
        started_(std::chrono::steady_clock::now()) {
    log_("store: " + config_.paths.database.string() + " (schema version " + std::to_string(store_.schema_version()) + ")");
    executor_.adopt_safe_start(std::move(safe_start_));
    const auto [resumed, interrupted] = queue_.recover();
    if (resumed || interrupted)
      log_("recovered after restart: " + std::to_string(resumed) + " job(s) to resume, " + std::to_string(interrupted) + " interrupted");
    executor_.start();
    lab_.start();
  }

  ~CoreService() override { shutdown(); }

  Json call(std::string_view method, const Json& params, const Caller& caller) override {
    const auto it = handlers().find(method);
    if (it == handlers().end()) throw RequestError(RpcCode::method_not_found, "unknown method \"" + std::string(method) + "\"");
    check_call(method, params);
    const Json p = params.is_null() ? Json::object() : params;
    try {
      return (this->*(it->second))(p, caller);
    } catch (const DomainError& e) {
      throw to_request_error(e);  // the one mapping to JSON-RPC codes (daemon/error_codes.hpp)
    }
  }

  EventBus& events() override { return events_; }

  void shutdown() override {
    std::call_once(shutdown_once_, [this] {
      executor_.stop();
      lab_.stop();
      // Only claim what is known: a bench that would not take the make-safe
      // commands (already logged by the executor) is not reported as off.
      if (executor_.bench_known_safe()) log_.info("shut down: outputs off");
      else log_.error("shut down: outputs NOT known to be off (see the errors above); check the bench");
    });
  }

 private:
  using Handler = Json (CoreService::*)(const Json&, const Caller&);

  // The dispatch table: one entry per row of daemon/methods.hpp.
  static const std::map<std::string_view, Handler>& handlers() {
#define JUNCO_BIND(name, handler, summary, params) {name, &CoreService::handler},
    static const std::map<std::string_view, Handler> table{JUNCO_SERVICE_METHODS(JUNCO_BIND)};
#undef JUNCO_BIND
    return table;
  }

  Json status(const Json&, const Caller&) {
    Json queued = Json::array();
    for (const auto& j : store_.jobs(JobState::queued)) queued.push_back(j.id);
    const auto running = queue_.running();
    return {{"version", junco::version},
            {"uptime_s", std::chrono::duration<double>(std::chrono::steady_clock::now() - started_).count()},
            {"running_job", running ? Json(*running) : Json(nullptr)},
            {"queue", queued},
            {"bench_open", executor_.bench_open()},
            {"bench_problem", executor_.bench_problem().empty() ? Json(nullptr) : Json(executor_.bench_problem())},
            {"database", config_.paths.database.string()},
            {"schema_version", store_.schema_version()},
            {"lab", lab_.status()}};
  }

  Json check_bench(const Json&, const Caller&) { return executor_.check_bench(); }

  Json describe(const Json&, const Caller&) {
    Json instruments = Json::array();
    const Json ids = executor_.identities();
    for (const auto& [role, ic] : config_.bench)
      instruments.push_back({{"role", role}, {"address", ic.address}, {"dialect", ic.dialect_path.string()},
                             {"identity", ids.contains(role) ? ids[role] : Json(nullptr)}});
    const auto& f = config_.fixture;
    const auto& s = config_.safety;
    return {{"instruments", instruments},
            {"seen", to_json(store_.instruments())},
            {"fixture",
             {{"bias_resistor_ohm", f.bias_resistor_ohm}, {"dc_return_ohm", f.dc_return_ohm}, {"source_ohm", f.source_ohm},
              {"load_ohm", f.load_ohm}, {"slots", f.slots}, {"current_from", to_string(f.current_from)}, {"stray_c_f", f.stray_c_f}}},
            {"safety",
             {{"max_supply_v", s.max_supply_v}, {"current_limit_a", s.current_limit_a}, {"max_power_w", s.max_power_w},
              {"max_reverse_v", s.max_reverse_v}, {"max_job_s", s.max_job_s}}},
            {"limits",
             {{"max_points_per_job", config_.limits.max_points_per_job},
              {"max_plan_memory_bytes", config_.limits.max_plan_memory_bytes}}},
            {"accuracy",
             {{"v_rel", config_.accuracy.v_rel}, {"v_abs_v", config_.accuracy.v_abs_v}, {"i_rel", config_.accuracy.i_rel},
              {"i_abs_a", config_.accuracy.i_abs_a}, {"level_db", config_.level_db}}}};
  }

  Json submit(const Json& params, const Caller& caller) {
    if (!params.contains("plan")) throw RequestError(RpcCode::invalid_params, "plan: missing (required)", Json{{"field", "plan"}});
    const Plan plan = parse_plan(params.at("plan"));
    check_plan(plan, config_);
    const long total = static_cast<long>(points_per_job(plan));  // counted, not expanded (check_plan capped it)
    const Id id = queue_.submit(plan, total, caller);
    log_("job " + std::to_string(id) + ": submitted by uid " + std::to_string(caller.uid) + " pid " + std::to_string(caller.pid) + " (" +
         std::to_string(total) + " points)");
    return {{"job_id", id}, {"points_total", total}};
  }

  // job.submit's checks, and what the plan would do; nothing is queued.
  Json check_plan_dry(const Json& params, const Caller&) {
    if (!params.contains("plan")) throw RequestError(RpcCode::invalid_params, "plan: missing (required)", Json{{"field", "plan"}});
    const Plan plan = parse_plan(params.at("plan"));
    check_plan(plan, config_);
    const PlanEstimate e = estimate_plan(plan, config_);
    Json limits = Json::array();
    for (const auto& l : e.limits)
      limits.push_back({{"limit", l.limit}, {"limit_value", l.limit_value}, {"plan_value", l.plan_value}, {"unit", l.unit},
                        {"binds", l.binds}, {"note", l.note}});
    Json out{{"points_per_part", e.points_per_part}, {"points_total", e.points_total}, {"parts", plan.parts.size()},
             {"temperatures", e.temperatures}, {"soak_s", e.soak_s},
             {"min_duration_s", e.min_duration_s}, {"duration_s", e.duration_s},
             {"peak", {{"supply_v", e.peak_supply_v}, {"current_a", e.peak_current_a}, {"power_w", e.peak_power_w}, {"reverse_v", e.peak_reverse_v}}},
             {"limits", limits}};
    if (plan.heating.pulse)
      out["pulse"] = {{"steps_per_part", e.pulsed_steps_per_part}, {"from", e.pulse_from}, {"duty", e.pulse_duty}};
    return out;
  }

  Json list_jobs(const Json& params, const Caller&) {
    const auto name = opt_string_param(params, "state");
    std::optional<JobState> state;
    if (name && !(state = job_state_from_string(*name)))
      throw BadInput("state", "unknown job state \"" + *name + "\" (one of: " + job_state_names() + ")");
    return {{"jobs", to_json(store_.jobs(state))}};
  }

  Json get_job(const Json& params, const Caller&) {
    const Id id = id_param(params, "job_id");
    auto j = store_.job(id);
    if (!j) throw NotFound("no job " + std::to_string(id), "job_id", id);
    Json out = to_json(*j);
    out["runs"] = to_json(store_.runs_of_job(id));
    return out;
  }

  Json cancel_job(const Json& params, const Caller&) { return to_json(queue_.cancel(id_param(params, "job_id"))); }
  Json pause_job(const Json& params, const Caller&) { return to_json(queue_.pause(id_param(params, "job_id"))); }
  Json resume_job(const Json& params, const Caller&) { return to_json(queue_.resume(id_param(params, "job_id"))); }
  Json list_lots(const Json&, const Caller&) { return {{"lots", to_json(store_.lots())}}; }
  Json list_parts(const Json& params, const Caller&) { return {{"parts", to_json(store_.parts(opt_string_param(params, "lot")))}}; }

  PartRow part_or_throw(Id part_id) {
    auto p = store_.part(part_id);
    if (!p) throw NotFound("no part " + std::to_string(part_id), "part_id", part_id);
    return *p;
  }

  // The run asked for, else the part's latest; nullopt when it has none.
  std::optional<RunRecord> run_of(const PartRow& part, const Json& params) {
    const auto run_id = opt_id_param(params, "run_id");
    std::optional<RunRecord> run;
    for (auto& r : store_.runs_of_part(part.id))
      if (!run_id || r.id == *run_id) run = std::move(r);  // latest unless asked
    if (run_id && !run) throw NotFound("no run " + std::to_string(*run_id) + " for part " + std::to_string(part.id), "run_id", *run_id);
    return run;
  }

  Json readings(const Json& params, const Caller&) {
    const PartRow part = part_or_throw(id_param(params, "part_id"));
    const auto run = run_of(part, params);
    const auto rows = run ? store_.points(run->id) : std::vector<PointRow>{};
    // How the part's latest fit treated each reading, when that fit is of this run.
    const auto fit = store_.latest_fit(part.id);
    const bool fit_of_run = run && fit && fit->run_id && *fit->run_id == run->id;
    const auto uses = fit_of_run ? fit_use_of_points(rows, fit->fit) : std::vector<std::optional<FitUse>>(rows.size());
    Json points = Json::array();
    for (std::size_t k = 0; k < rows.size(); ++k) points.push_back(to_json(rows[k], uses[k]));
    return {{"part", to_json(part)},
            {"run", run ? to_json(*run) : Json(nullptr)},
            {"fit_id", fit_of_run ? Json(fit->id) : Json(nullptr)},
            {"points", points}};
  }

  std::shared_ptr<const FitRecord> usable_fit(const PartRow& part, const char* purpose) {
    auto fit = store_.latest_fit(part.id);
    if (!fit || !fit->fit.usable()) throw NotFound("part " + std::to_string(part.id) + " has no usable fit " + purpose, "part_id", part.id);
    return with_temperature_law(std::move(fit), part.id);
  }

  // part.fit's sibling field: the part's latest temperature law (EG, XTI,
  // TRS1 from a multi-temperature job), null when it has none.
  std::shared_ptr<const FitRecord> with_temperature_law(std::shared_ptr<const FitRecord> fit, Id part_id) {
    const auto law = store_.latest_temperature_fit(part_id);
    if (!law) return fit;
    auto out = std::make_shared<FitRecord>(*fit);
    out->temperature_law = *law;
    return out;
  }

  static std::vector<double> positive_list(const Json& params, const char* key) {
    const Json& c = params[key];
    if (!c.is_array() || c.empty() || c.size() > 64)
      throw RequestError(RpcCode::invalid_params, std::string(key) + ": must be an array of 1..64 numbers", Json{{"field", key}});
    std::vector<double> out;
    for (const auto& v : c) {
      if (!v.is_number() || !(v.get<double>() > 0) || !std::isfinite(v.get<double>()))
        throw RequestError(RpcCode::invalid_params, std::string(key) + ": every entry must be a number > 0", Json{{"field", key}});
      out.push_back(v.get<double>());
    }
    return out;
  }

  static double opt_number_param(const Json& params, const char* key, double fallback, bool allow_zero) {
    if (!params.contains(key) || params[key].is_null()) return fallback;
    const Json& v = params[key];
    if (!v.is_number() || !std::isfinite(v.get<double>()) || v.get<double>() < 0 || (!allow_zero && v.get<double>() == 0))
      throw RequestError(RpcCode::invalid_params, std::string(key) + (allow_zero ? ": must be a number >= 0" : ": must be a number > 0"),
                         Json{{"field", key}});
    return v.get<double>();
  }

  // A design calculator on the latest usable fit (design/calculators.hpp).
  Json design(const Json& params, const Caller&) {
    const PartRow part = part_or_throw(id_param(params, "part_id"));
    const std::string calculator = calculator_param(params);
    const auto fit = usable_fit(part, "to design with");
    const fitting::DesignPart dp = design_part(part, *fit);
    Json answer = run_calculator(calculator, &dp, params);
    answer["part_id"] = part.id;
    answer["fit_id"] = fit->id;
    return answer;
  }

  // A design calculator on a part given by value (an answer's "part" reads
  // back as the same part); no store access.
  Json design_by_value(const Json& params, const Caller&) {
    const std::string calculator = calculator_param(params);
    std::optional<fitting::DesignPart> dp;
    if (params.contains("part")) {
      try {
        dp = fitting::design_part_from_json(params["part"]);
      } catch (const fitting::DesignInputError& e) {
        throw RequestError(RpcCode::invalid_params, e.what(), Json{{"field", e.field()}});
      }
    }
    return run_calculator(calculator, dp ? &*dp : nullptr, params);
  }

  static std::string calculator_param(const Json& params) {
    const auto calculator = opt_string_param(params, "calculator");
    if (!calculator) throw RequestError(RpcCode::invalid_params, "calculator: missing (required)", Json{{"field", "calculator"}});
    return *calculator;
  }

  // Runs the calculator on params.inputs; a bad input is invalid_params with
  // data.field = inputs.KEY (or calculator, inputs, part).
  static Json run_calculator(const std::string& calculator, const fitting::DesignPart* part, const Json& params) {
    const Json inputs = params.contains("inputs") ? params["inputs"] : Json::object();
    try {
      return fitting::run_design(calculator, part, inputs);
    } catch (const fitting::DesignInputError& e) {
      const bool top = e.field() == "calculator" || e.field() == "inputs" || e.field() == "part";
      const std::string field = top ? e.field() : "inputs." + e.field();
      throw RequestError(RpcCode::invalid_params, (top ? "" : "inputs.") + std::string(e.what()), Json{{"field", field}});
    }
  }

  // The lot's parts with a usable fit, as lot statistics take them; the others
  // are listed with the reason. not_found for an unknown lot or no fit at all.
  std::vector<fitting::LotPart> lot_parts(const Json& params, Json& left_out) {
    const auto lot = opt_string_param(params, "lot");
    if (!lot) throw RequestError(RpcCode::invalid_params, "lot: missing (required)", Json{{"field", "lot"}});
    const auto parts = store_.parts(*lot);
    if (parts.empty()) throw NotFound("no lot \"" + *lot + "\"", "lot", *lot);
    std::vector<fitting::LotPart> out;
    left_out = Json::array();
    for (const auto& p : parts) {
      const auto fit = store_.latest_fit(p.part.id);
      if (!fit || !fit->fit.usable()) {
        left_out.push_back({{"label", p.part.label}, {"reason", fit ? std::string("fit ") + fitting::to_string(fit->fit.status) : std::string("no fit yet")}});
        continue;
      }
      out.push_back(lot_part(p.part, *fit));
    }
    if (out.empty()) throw NotFound("lot \"" + *lot + "\" has no part with a usable fit", "lot", *lot);
    return out;
  }

  Json lot_stats(const Json& params, const Caller&) {
    fitting::LotStatsOptions o;
    if (params.contains("currents_a")) o.currents_a = positive_list(params, "currents_a");
    o.match_current_a = opt_number_param(params, "match_current_a", o.match_current_a, false);
    o.match_tolerance_v = opt_number_param(params, "match_tolerance_v", o.match_tolerance_v, false);
    if (params.contains("set_size")) {
      const Json& v = params["set_size"];
      if (!v.is_number_integer() || v.get<long>() < 2 || v.get<long>() > 64)
        throw RequestError(RpcCode::invalid_params, "set_size: must be an integer 2..64", Json{{"field", "set_size"}});
      o.set_size = v.get<std::size_t>();
    }
    Json left_out;
    const auto parts = lot_parts(params, left_out);
    return lot_stats_report(params["lot"].get<std::string>(), parts, left_out, o);
  }

  Json lot_export(const Json& params, const Caller&) {
    const auto format = opt_string_param(params, "format");
    if (!format || (*format != "spice" && *format != "json"))
      throw RequestError(RpcCode::invalid_params, "format: must be \"spice\" or \"json\"", Json{{"field", "format"}});
    Json left_out;
    const auto parts = lot_parts(params, left_out);
    const std::string lot = params["lot"].get<std::string>();
    const fitting::PartModel m = fitting::lot_nominal_model(lot, parts);
    const std::string content = *format == "spice" ? fitting::spice_model_card(m, fitting::spice_model_name("D_" + lot + "_NOM"))
                                                   : fitting::model_document_json(m);
    return {{"format", *format}, {"content", content}, {"parts", parts.size()}, {"left_out", left_out}};
  }

  // A calculator's worst case over the lot's fitted parts (the measured
  // spread) and the corners of the given tolerances (design/worst_case.hpp).
  Json lot_design(const Json& params, const Caller&) {
    const std::string calculator = calculator_param(params);
    const auto lot = opt_string_param(params, "lot");
    if (!lot) throw RequestError(RpcCode::invalid_params, "lot: missing (required)", Json{{"field", "lot"}});
    fitting::WorstCaseCorners w;
    if (params.contains("temps_k")) w.temps_k = positive_list(params, "temps_k");
    w.supply_tol = opt_number_param(params, "supply_tol", 0.0, true);
    w.resistor_tol = opt_number_param(params, "resistor_tol", 0.0, true);
    const auto rows = store_.parts(*lot);
    if (rows.empty()) throw NotFound("no lot \"" + *lot + "\"", "lot", *lot);
    std::vector<fitting::DesignPart> parts;
    std::vector<Id> ids;
    Json left_out = Json::array();
    for (const auto& p : rows) {
      const auto fit = store_.latest_fit(p.part.id);
      if (!fit || !fit->fit.usable()) {
        left_out.push_back({{"label", p.part.label}, {"reason", fit ? std::string("fit ") + fitting::to_string(fit->fit.status) : std::string("no fit yet")}});
        continue;
      }
      parts.push_back(design_part(p.part, *fit));
      parts.back().label = p.part.label;
      ids.push_back(p.part.id);
    }
    if (parts.empty()) throw NotFound("lot \"" + *lot + "\" has no part with a usable fit", "lot", *lot);
    const Json inputs = params.contains("inputs") ? params["inputs"] : Json::object();
    Json answer;
    try {
      answer = fitting::design_worst_case(calculator, parts, inputs, w);
    } catch (const fitting::DesignInputError& e) {
      const std::string f = e.field();
      const bool top = f == "calculator" || f == "inputs" || f == "supply_tol" || f == "resistor_tol" || f == "temps_k" || f == "lot";
      const std::string field = top ? f : "inputs." + f;
      throw RequestError(RpcCode::invalid_params, (top ? "" : "inputs.") + std::string(e.what()), Json{{"field", field}});
    }
    for (auto& line : answer["result"])
      for (const char* end : {"min", "max"}) line[end]["part_id"] = ids[line[end]["part_index"].get<std::size_t>()];
    for (auto* list : {&answer["not_achievable"], &answer["failures"]})
      for (auto& e : *list) e["part_id"] = ids[e["part_index"].get<std::size_t>()];
    answer["lot"] = *lot;
    answer["left_out"] = left_out;
    return answer;
  }

  // The AC readings of a run against the model of the latest fit, and the joint AC+DC fit.
  Json transfer(const Json& params, const Caller&) {
    const PartRow part = part_or_throw(id_param(params, "part_id"));
    TransferOptions o;
    o.accuracy = config_.accuracy;
    o.ac_sigma_db = opt_number_param(params, "ac_sigma_db", config_.level_sigma_db(), false);
    o.cj_f = opt_number_param(params, "cj_f", o.cj_f, true);
    o.max_signal_ratio = opt_number_param(params, "max_signal_ratio", o.max_signal_ratio, false);
    o.ac_floor_v = opt_number_param(params, "ac_floor_v", o.ac_floor_v, true);
    const auto run = run_of(part, params);
    if (!run) throw NotFound("part " + std::to_string(part.id) + " has no run", "part_id", part.id);
    const auto fit = usable_fit(part, "to model the transfer with");
    // The part type its plan measured it as (a run without its job: a junction).
    if (const auto job = store_.job(run->job_id)) o.part_type = part_type_from_string(job->plan.part_type).value_or(PartType::junction);
    return transfer_report(part, *run, *fit, store_.points(run->id), o);
  }

  std::shared_ptr<const FitRecord> latest_fit(Id part_id) {
    part_or_throw(part_id);
    auto fit = store_.latest_fit(part_id);
    if (!fit) throw NotFound("part " + std::to_string(part_id) + " has no fit yet", "part_id", part_id);
    return with_temperature_law(std::move(fit), part_id);
  }

  // part.fit is the most asked-for answer (clients poll it during a job):
  // its JSON is kept with the stored record it was written from and written
  // again only when the store hands out a new record (a new fit, or a part
  // with a temperature law, whose record is made per request).
  Json fit_of(const Json& params, const Caller&) {
    const Id part_id = id_param(params, "part_id");
    const auto fit = latest_fit(part_id);
    {
      std::lock_guard lock(fit_json_mutex_);
      if (const auto it = fit_json_.find(part_id); it != fit_json_.end() && it->second.first == fit) return *it->second.second;
    }
    auto json = std::make_shared<const Json>(to_json(*fit));
    std::lock_guard lock(fit_json_mutex_);
    fit_json_[part_id] = {fit, json};
    return *json;
  }

  // Each figure with its standard error from the stored fit's covariance
  // (fitting/derived.hpp, delta method).
  Json figures(const Json& params, const Caller&) {
    const Id part_id = id_param(params, "part_id");
    std::vector<double> currents{1e-4, 1e-3, 1e-2};
    if (params.contains("currents_a")) currents = positive_list(params, "currents_a");
    const auto fit = latest_fit(part_id);
    const fitting::FitResult& r = fit->fit;
    if (!r.usable())
      throw NotFound("part " + std::to_string(part_id) + " has no usable fit (" + fitting::to_string(r.status) + ")", "part_id", part_id);
    Json rows = Json::array();
    for (double i : currents) {
      const auto vf = fitting::forward_voltage_v(r, i);
      const auto rd = fitting::small_signal_resistance_ohm(r, i);
      // {value, std_error} as part.fit and junco fit --json give every estimate.
      rows.push_back({{"i_a", i}, {"vf_v", fitting::estimate_json(vf)}, {"rd_ohm", fitting::estimate_json(rd)}});
    }
    return {{"part_id", part_id}, {"fit_id", fit->id}, {"run_id", fit->run_id ? Json(*fit->run_id) : Json(nullptr)}, {"temp_k", fitting::number_or_null(r.temp_k)}, {"figures", rows}};
  }

  Json export_part(const Json& params, const Caller&) {
    const PartRow part = part_or_throw(id_param(params, "part_id"));
    const auto format = opt_string_param(params, "format");
    if (!format) throw RequestError(RpcCode::invalid_params, "format: missing (required)", Json{{"field", "format"}});
    if (*format == "json" || *format == "spice") {
      const auto fit = usable_fit(part, "to export as a model");
      return {{"format", *format}, {"content", *format == "json" ? export_model_json(part, *fit) : export_spice(part, *fit)}};
    }
    if (*format == "csv") {
      const auto runs = store_.runs_of_part(part.id);
      return {{"format", "csv"}, {"content", export_csv(runs.empty() ? std::vector<PointRow>{} : store_.points(runs.back().id))}};
    }
    if (*format == "iv-csv" || *format == "ac-csv" || *format == "off-csv") {
      const auto runs = store_.runs_of_part(part.id);
      const auto points = runs.empty() ? std::vector<PointRow>{} : store_.points(runs.back().id);  // latest run
      const std::string content =
          *format == "iv-csv" ? export_iv_csv(points) : *format == "ac-csv" ? export_ac_csv(points) : export_off_csv(points);
      return {{"format", *format}, {"content", content}};
    }
    throw RequestError(RpcCode::invalid_params,
                       "format: must be \"json\", \"spice\", \"csv\", \"iv-csv\", \"ac-csv\" or \"off-csv\", got \"" + *format + "\"",
                       Json{{"field", "format"}});
  }

  // The part's two-port at one bias as Touchstone text (formats/touchstone.hpp),
  // from the latest usable fit: bias_i_a (forward) or reverse_v, exactly one.
  Json touchstone(const Json& params, const Caller&) {
    const PartRow part = part_or_throw(id_param(params, "part_id"));
    const bool has_i = params.contains("bias_i_a") && !params["bias_i_a"].is_null();
    const bool has_v = params.contains("reverse_v") && !params["reverse_v"].is_null();
    if (has_i == has_v)
      throw RequestError(RpcCode::invalid_params, "bias_i_a or reverse_v: give exactly one (a forward current or a reverse voltage)",
                         Json{{"field", has_i ? "reverse_v" : "bias_i_a"}});
    fitting::TouchstoneRequest req;
    req.bias = has_i ? fitting::BiasState{fitting::BiasState::Kind::forward_current, opt_number_param(params, "bias_i_a", 0, false)}
                     : fitting::BiasState{fitting::BiasState::Kind::reverse_voltage, opt_number_param(params, "reverse_v", 0, true)};
    if (!params.contains("freqs_hz")) throw RequestError(RpcCode::invalid_params, "freqs_hz: missing (required)", Json{{"field", "freqs_hz"}});
    const Json& f = params["freqs_hz"];
    if (!f.is_array() || f.empty() || f.size() > fitting::max_frequency_points)
      throw RequestError(RpcCode::invalid_params, "freqs_hz: must be an array of 1.." +
                                                      std::to_string(fitting::max_frequency_points) + " numbers",
                         Json{{"field", "freqs_hz"}});
    for (const auto& v : f) {
      if (!v.is_number()) throw RequestError(RpcCode::invalid_params, "freqs_hz: every entry must be a number", Json{{"field", "freqs_hz"}});
      req.freqs_hz.push_back(v.get<double>());
    }
    const auto mount = opt_string_param(params, "mount").value_or("series");
    if (mount != "series" && mount != "shunt")
      throw RequestError(RpcCode::invalid_params, "mount: must be \"series\" or \"shunt\", got \"" + mount + "\"", Json{{"field", "mount"}});
    req.mount = mount == "shunt" ? fitting::SwitchKind::shunt : fitting::SwitchKind::series;
    req.z0_ohm = opt_number_param(params, "z0_ohm", 50.0, false);
    req.package.ls_h = opt_number_param(params, "ls_h", 0.0, true);
    req.package.cp_f = opt_number_param(params, "cp_f", 0.0, true);
    const auto fit = usable_fit(part, "to export a two-port from");
    const fitting::PartModel model = part_model(part, *fit);
    if (const std::string problem = fitting::touchstone_request_problem(model, req); !problem.empty()) {
      // The library names quantities as people say them; the error names the param.
      const std::string what = problem.substr(0, problem.find(':'));
      const std::string field = what == "frequencies" ? "freqs_hz" : what == "z0" ? "z0_ohm" : what == "package Ls" ? "ls_h"
                              : what == "package Cp" ? "cp_f" : what == "bias" ? (has_i ? "bias_i_a" : "reverse_v") : "part_id";
      throw RequestError(RpcCode::invalid_params, problem, Json{{"field", field}});
    }
    return {{"format", "touchstone"}, {"content", fitting::touchstone_s2p(model, req)}};
  }

  // Opens the store; a failure is logged (the outputs are already off) and
  // thrown on to the caller.
  static Store open_store(const Config& config, const LogFn& log) {
    try {
      return Store(config.paths.database);
    } catch (const StoreError& e) {
      log.error(std::string("store: cannot open, stopping (outputs were turned off first): ") + e.what());
      throw;
    }
  }

  Config config_;
  LogFn log_;
  LocalEventBus events_;
  BenchOpener open_bench_;
  SafeStart safe_start_;  // moved into the executor once the store is open
  Store store_;
  std::mutex fit_json_mutex_;
  std::unordered_map<Id, std::pair<std::shared_ptr<const FitRecord>, std::shared_ptr<const Json>>> fit_json_;
  LabPublisher lab_;  // after store_: the store has migrated the outbox in
  JobQueue queue_;
  Executor executor_;
  std::chrono::steady_clock::time_point started_;
  std::once_flag shutdown_once_;
};

}  // namespace

std::unique_ptr<Service> make_service(const Config& config, ServiceOptions options) {
  return std::make_unique<CoreService>(config, std::move(options));
}

}  // namespace junco::daemon
