#include "state_command.h"

#include <unistd.h>

#include <iostream>
#include <memory>
#include <sstream>

#include "fit_output.h"

namespace rimwatch::cli {
namespace {

using json = nlohmann::ordered_json;
using Tone = TerminalStyle::Tone;

constexpr const char* kStateDescription =
    "Show the current estimate, stability and alerts of a model";

constexpr const char* kStateFooter =
    "\nAsks rimwatchd for the state of MODEL after every acknowledged observation and prints:\n"
    "the tracking window (rows, first and last period); the coefficients with the standard\n"
    "errors of the model's covariance setting and their t ratios; the residual covariance\n"
    "(cross-products / (rows - k)); the companion eigenvalues with their moduli; the spectral\n"
    "radius with its delta-method SE, the one-sided 95% upper bound rho + 1.645 SE, the warn\n"
    "and critical levels and the stability level now; the latest Wald test of every monitored\n"
    "restriction on the window; the alerts active now.\n"
    "--json prints the daemon's reply as received (schemas/wire/reply.state.schema.json); its\n"
    "\"fit\" member has the keys of `rimwatch fit --json`.\n"
    "\n"
    "Example:\n"
    "  rimwatch state desk\n"
    "  rimwatch state desk --json | jq .stability\n"
    "\n"
    "Alerts are statistical evidence, not trading or policy advice.\n"
    "\n";

std::string Regressor(const json& c) {
  const std::string term = c.value("term", "");
  if (term != "lag") return term;
  return Text(c.value("variable", json())) + "[t-" + Text(c.value("lag", json())) + "]";
}

void WriteCoefficients(const json& fit, std::ostream& out) {
  const json& cov = fit.value("covariance", json::object());
  out << "Coefficients (" << Text(cov.value("kind", json())) << " standard errors";
  if (cov.contains("hac_lags")) out << ", Bartlett lag " << Text(cov["hac_lags"]);
  out << ")\n";
  TextTable table({"equation", "regressor", "estimate", "std.error", "t"});
  for (const json& c : fit.value("coefficients", json::array())) {
    const json est = c.value("estimate", json());
    const json se = c.value("std_error", json());
    json t;
    if (est.is_number() && se.is_number() && se.get<double>() > 0) {
      t = est.get<double>() / se.get<double>();
    }
    table.Add({Text(c.value("equation", json())), Regressor(c), Num(est), Num(se), Num(t, 3)});
  }
  table.Write(out, true, "  ");
}

void WriteSigma(const json& fit, std::ostream& out) {
  const json& vars = fit.value("variables", json::array());
  std::vector<std::string> header = {""};
  for (const json& v : vars) header.push_back(Text(v));
  TextTable table(header);
  const json& sigma = fit.value("sigma", json::array());
  for (std::size_t i = 0; i < sigma.size() && i < vars.size(); ++i) {
    std::vector<std::string> row = {Text(vars[i])};
    for (const json& x : sigma[i]) row.push_back(Num(x));
    table.Add(row);
  }
  out << "Residual covariance sigma (cross-products / (rows - k))\n";
  table.Write(out, true, "  ");
}

void WriteEigenvalues(const json& fit, std::ostream& out) {
  TextTable table({"re", "im", "modulus"});
  for (const json& z : fit.value("eigenvalues", json::array())) {
    table.Add(
        {Num(z.value("re", json())), Num(z.value("im", json())), Num(z.value("modulus", json()))});
  }
  out << "Companion eigenvalues (largest modulus first)\n";
  table.Write(out, true, "  ");
}

void WriteStability(const json& reply, const json& fit, const TerminalStyle& style,
                    std::ostream& out) {
  const json& s = reply.value("stability", json::object());
  const std::string level = Text(s.value("level", json("none")));
  const Tone tone = level == "critical" ? Tone::kRed
                    : level == "warn"   ? Tone::kYellow
                                        : Tone::kGreen;
  out << "Spectral radius\n";
  TextTable table({"rho", "SE", "upper (rho + 1.645 SE)", "warn", "critical", "level"});
  table.Add({Num(s.value("rho", json())), Num(s.value("rho_se", json()), 4),
             Num(s.value("upper", json())), Num(s.value("warn", json())),
             Num(s.value("critical", json())), level});
  std::ostringstream text;
  table.Write(text, true, "  ");
  // Colour the level word after alignment (escapes would upset the padding).
  std::string body = text.str();
  const std::size_t at = body.rfind(level);
  if (at != std::string::npos) body.replace(at, level.size(), style.Paint(tone, level));
  out << body;
  if (s.contains("rows_to_unit") && s["rows_to_unit"].is_number()) {
    out << "  rho reaches 1 in about " << Num(s["rows_to_unit"], 3)
        << " rows at its current slope\n";
  }
  const json& sr = fit.value("spectral_radius", json::object());
  if (sr.contains("std_error_unavailable")) {
    out << "  SE unavailable: " << Text(sr["std_error_unavailable"]) << "\n";
  }
}

void WriteRestrictions(const json& fit, std::ostream& out) {
  const json& tests = fit.value("tests", json::array());
  if (tests.empty()) return;
  out << "Monitored restrictions (Wald test on the window; W ~ chi-squared(df) under H0)\n";
  bool notes = false;
  for (const json& t : tests) notes = notes || t.contains("unavailable");
  std::vector<std::string> header = {"restriction", "W", "df", "p-value"};
  if (notes) header.push_back("unavailable because");
  TextTable table(header);
  for (const json& t : tests) {
    std::vector<std::string> row = {Text(t.value("name", json())),
                                    Num(t.value("statistic", json())), Text(t.value("df", json())),
                                    Num(t.value("p_value", json()), 4)};
    if (notes) row.push_back(t.contains("unavailable") ? Text(t["unavailable"]) : "");
    table.Add(row);
  }
  table.Write(out, true, "  ");
}

void WriteAlerts(const json& reply, const TerminalStyle& style, std::ostream& out) {
  const json& alerts = reply.value("active_alerts", json::array());
  out << "Active alerts: " << (alerts.empty() ? "none" : std::to_string(alerts.size())) << "\n";
  for (const json& a : alerts) {
    const std::string level = Text(a.value("level", json()));
    out << "  " << style.Paint(level == "critical" ? Tone::kRed : Tone::kYellow, level) << "  "
        << Text(a.value("monitor", json())) << "  since period " << Text(a.value("period", json()))
        << " (row " << Text(a.value("row", json())) << "): " << Text(a.value("message", json()))
        << "\n";
  }
}

}  // namespace

void WriteStateText(const json& reply, const TerminalStyle& style, std::ostream& out) {
  out << style.Paint(Tone::kBold, "Model " + Text(reply.value("model", json()))) << ": "
      << Text(reply.value("rows", json())) << " rows, last period "
      << Text(reply.value("last_period", json()));
  if (reply.value("stale", false))
    out << "  " << style.Paint(Tone::kYellow, "(stale: no new data)");
  out << "\n";
  const json& fit = reply.value("fit", json());
  if (!fit.is_object()) {
    out << "No estimate yet: " << Text(reply.value("fit_unavailable", json())) << "\n\n";
    WriteAlerts(reply, style, out);
    out << "\n" << kCaution << "\n";
    return;
  }
  const json& sample = fit.value("sample", json::object());
  out << "Tracking window: " << Text(sample.value("rows", json())) << " rows, periods "
      << Text(sample.value("first_period", json())) << " .. "
      << Text(sample.value("last_period", json())) << "; VAR(" << Text(fit.value("lags", json()))
      << "), deterministic terms: " << Text(fit.value("deterministic", json())) << "\n\n";
  WriteCoefficients(fit, out);
  out << "\n";
  WriteSigma(fit, out);
  out << "\n";
  WriteEigenvalues(fit, out);
  out << "\n";
  WriteStability(reply, fit, style, out);
  out << "\n";
  if (!fit.value("tests", json::array()).empty()) {
    WriteRestrictions(fit, out);
    out << "\n";
  }
  WriteAlerts(reply, style, out);
  out << "\n" << kCaution << "\n";
}

int RunState(const StateCommandOptions& options, std::ostream& out, std::ostream& err) {
  Reply reply;
  std::string error;
  if (!CallDaemon(options.connection, json{{"type", "state"}, {"model", options.model}}, &reply,
                  &error)) {
    err << "rimwatch state: " << error << "\n";
    return kExitUnreachable;
  }
  if (!reply.ok()) {
    err << "rimwatch state: refused: " << RefusalText(reply) << "\n";
    return kExitRefused;
  }
  if (options.json) {
    out << reply.raw << "\n";
  } else {
    std::ostringstream text;
    WriteStateText(reply.doc, TerminalStyle::For(STDOUT_FILENO), text);
    out << text.str();
  }
  return kExitOk;
}

Command RegisterStateCommand(CLI::App* parent) {
  auto options = std::make_shared<StateCommandOptions>();
  CLI::App* sub = parent->add_subcommand("state", kStateDescription);
  sub->add_option("model", options->model, "model name")->required()->type_name("MODEL");
  sub->add_flag("--json", options->json, "print the daemon's reply as is");
  AddConnectionOptions(sub, &options->connection, Sockets::kIngest);
  sub->footer(std::string(kStateFooter) + kDaemonExitCodeHelp);
  return Command{sub, [options] { return RunState(*options, std::cout, std::cerr); }};
}

}  // namespace rimwatch::cli
