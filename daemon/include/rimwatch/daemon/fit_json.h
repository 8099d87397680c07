// The JSON form of a FitReport (schemas/fit.schema.json): the document of `rimwatch fit --json`,
// the "summary" of `rimwatch replay --json` and the "fit" member of the daemon's state reply
// (schemas/wire/reply.state.schema.json). One function, so the three cannot drift apart.
//
// Doubles are stored as they are; nlohmann::json prints the shortest text that reads back to the
// same double, so the numbers round-trip exactly.
//
// Thread safety: pure functions.
#pragma once

#include <nlohmann/json.hpp>

#include "rimwatch/engine/var_fit.h"
#include "rimwatch/engine/var_spec.h"

namespace rimwatch::daemon {

// The meaning of regressor j of an equation (var_spec.h: const, trend, then lag 1 of every
// variable, lag 2, ...).
struct RegressorTerm {
  const char* kind = "const";  // "const" | "trend" | "lag"
  int var = -1;                // lag terms only: index into spec.variables
  int lag = 0;                 // lag terms only, 1-based
};
// REQUIRES: 0 <= j < spec.k().
RegressorTerm TermOfRegressor(const VarSpec& spec, int j);

// The fit document. Variable names, lags and the deterministic terms come from report.spec; of
// `options` only covariance.kind (the "covariance" member) and criteria_pmax (>= 0: a "criteria"
// member from report.criteria) are read. `first_period` and `last_period` are the labels of the
// first and last estimation rows as the caller shows them (a string, or an integer row number).
// REQUIRES: `report` is a complete summary (FitVar or Monitor::Summary returned OK).
nlohmann::ordered_json FitReportJson(const FitReport& report, const FitOptions& options,
                                     const nlohmann::ordered_json& first_period,
                                     const nlohmann::ordered_json& last_period);

}  // namespace rimwatch::daemon
