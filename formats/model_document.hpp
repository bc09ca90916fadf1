// The JSON model document: one fitted part (or a lot's nominal) as junco
// exports it and as the offline calculators, `junco export` and `junco plot`
// read it. Schema: schema/model/part-model.schema.json (format id
// "junco.part-model", version 2). Layout:
//
//   {"format":"junco.part-model","version":2,
//    "part":{"label":"K7-014","lot":"LOT-2291","run_id":"run-12"},
//    "temp_k":300.15,
//    "model":{"is_a":{"value":2.1e-9,"std_error":1e-11},"n":{...},"rs_ohm":{...},
//             "rsh_ohm":{...}?,"cj0_f":{...}?,"vj_v":{...}?,"m":{...}?,"tt_s":{...}?},
//    "temperature_law":{"eg_ev":1.11,"xti":3,"trs1_per_k":0,"trs2_per_k2":0},
//    "covariance":{"parameters":["is_a","n","rs_ohm","tt_s"],"matrix":[[...],...],
//                  "source":"fit 12: is_a, n, rs_ohm, tt_s"}?,
//    "fit":{"rms_residual":0.8,"points_used":40}?}
//
// temperature_law (SPICE EG, XTI, TRS1, TRS2; temperature.hpp) is written
// always; on reading, an absent law or key means the SPICE default.
// covariance: the fitted parameters' covariance (SI units squared, in the
// order of parameters, each a key of model), what junco design propagates
// into every result's std_error; absent when the fit has none.
//
// Version 1 (still read): the temperature was "temperature_k" and there was no
// covariance (its standard errors alone, without their correlation, cannot
// give a design number's uncertainty). Version 2 renamed the key to temp_k,
// the name every other junco file and answer uses, and added covariance.
//
// Unknown fields are ignored on reading; a std_error that is not determined
// is omitted (never null).
#pragma once

#include "fitting/extract.hpp"
#include "formats/spice_card.hpp"

#include <optional>
#include <string>

namespace junco::fitting {

inline constexpr const char* model_document_format = "junco.part-model";
inline constexpr int model_document_version = 2;  // 1 is still read (see above)

std::string model_document_json(const PartModel& part);

// The part model of a forward fit: parameters, standard errors, temperature,
// RMS residual and points used, with the given identity.
PartModel part_model_from_fit(const FitResult& fit, std::string part_label, std::string lot, std::string run_id = "");

// nullopt with *why (one line naming the field) on a malformed document.
std::optional<PartModel> parse_model_document(const std::string& text, std::string* why = nullptr);

}  // namespace junco::fitting
