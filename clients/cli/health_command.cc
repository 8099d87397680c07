#include "health_command.h"

#include <unistd.h>

#include <cstdio>
#include <iostream>
#include <memory>
#include <sstream>

#include "model_command.h"

namespace rimwatch::cli {
namespace {

using json = nlohmann::ordered_json;

constexpr const char* kHealthDescription = "Show how rimwatchd is doing";

constexpr const char* kHealthFooter =
    "\nPrints the daemon's uptime, model rows estimated per second (recent), observations\n"
    "stored, duplicates and revisions since start, refused messages by code (only codes with\n"
    "refusals), every active model's rows, last period and staleness, the database size and\n"
    "the acknowledgements waiting for their group commit. --json prints the reply as received\n"
    "(schemas/wire/reply.health.schema.json). A quick liveness probe: exit 0 means the daemon\n"
    "answered, 5 that it did not within --timeout.\n"
    "\n"
    "Example:\n"
    "  rimwatch health\n"
    "  rimwatch health --timeout 2 --json\n"
    "\n"
    "Alerts are statistical evidence, not trading or policy advice.\n"
    "\n";

std::string Duration(double s) {
  char buf[64];
  const long t = static_cast<long>(s);
  if (t < 60) {
    std::snprintf(buf, sizeof buf, "%.1f s", s);
  } else if (t < 86400) {
    std::snprintf(buf, sizeof buf, "%ldh %02ldm %02lds", t / 3600, t / 60 % 60, t % 60);
  } else {
    std::snprintf(buf, sizeof buf, "%ldd %02ldh %02ldm", t / 86400, t / 3600 % 24, t / 60 % 60);
  }
  return buf;
}

std::string Bytes(const json& value) {
  if (!value.is_number()) return "-";
  const double b = value.get<double>();
  char buf[64];
  if (b < 1024 * 1024) {
    std::snprintf(buf, sizeof buf, "%.0f bytes", b);
  } else if (b < 1024.0 * 1024 * 1024) {
    std::snprintf(buf, sizeof buf, "%.1f MiB", b / (1024 * 1024));
  } else {
    std::snprintf(buf, sizeof buf, "%.2f GiB", b / (1024.0 * 1024 * 1024));
  }
  return buf;
}

void WriteHealthText(const json& h, bool tty, std::ostream& out) {
  const json uptime = h.value("uptime_s", json());
  out << "rimwatchd up " << (uptime.is_number() ? Duration(uptime.get<double>()) : "-") << ", "
      << Num(h.value("rows_per_s", json()), 4) << " model rows/s recently, "
      << Text(h.value("rows", json())) << " model rows since start\n";
  const json obs = h.value("observations", json::object());
  out << "observations since start: " << Text(obs.value("stored", json())) << " stored, "
      << Text(obs.value("duplicates", json())) << " duplicates, "
      << Text(obs.value("revisions", json()))
      << " revisions; model rows refused: " << Text(h.value("rows_refused", json())) << "\n";
  std::string refused;
  std::int64_t refused_total = 0;
  const json rejects = h.value("rejects", json::object());
  for (const auto& [code, n] : rejects.items()) {
    if (!n.is_number_integer() || n.get<std::int64_t>() == 0) continue;
    refused_total += n.get<std::int64_t>();
    refused += (refused.empty() ? "" : ", ") + code + " " + Text(n);
  }
  out << "refused messages: " << (refused_total == 0 ? "none" : refused) << "\n";
  out << "database " << Bytes(h.value("database_bytes", json())) << ", "
      << Text(h.value("pending_acks", json())) << " acknowledgements waiting\n";
  const json models = h.value("models", json::array());
  out << "models: " << models.size() << "\n";
  const json adding = h.value("models_being_added", json::array());
  if (adding.is_array() && !adding.empty()) {
    std::string names;
    for (const json& name : adding) names += (names.empty() ? "" : ", ") + Text(name);
    out << "being added (calibrating): " << names << "\n";
  }
  if (!models.empty()) WriteModelTable(models, /*spec=*/false, tty, out);
}

}  // namespace

int RunHealth(const HealthCommandOptions& options, std::ostream& out, std::ostream& err) {
  Reply reply;
  std::string error;
  if (!CallDaemon(options.connection, json{{"type", "health"}}, &reply, &error)) {
    err << "rimwatch health: " << error << "\n";
    return kExitUnreachable;
  }
  if (!reply.ok()) {
    err << "rimwatch health: refused: " << RefusalText(reply) << "\n";
    return kExitRefused;
  }
  if (options.json) {
    out << reply.raw << "\n";
  } else {
    std::ostringstream text;
    WriteHealthText(reply.doc, TerminalStyle::For(STDOUT_FILENO).tty, text);
    out << text.str();
  }
  return kExitOk;
}

Command RegisterHealthCommand(CLI::App* parent) {
  auto options = std::make_shared<HealthCommandOptions>();
  CLI::App* sub = parent->add_subcommand("health", kHealthDescription);
  sub->add_flag("--json", options->json, "print the daemon's reply as is");
  AddConnectionOptions(sub, &options->connection, Sockets::kIngest);
  sub->footer(std::string(kHealthFooter) + kDaemonExitCodeHelp);
  return Command{sub, [options] { return RunHealth(*options, std::cout, std::cerr); }};
}

}  // namespace rimwatch::cli
