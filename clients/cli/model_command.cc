#include "model_command.h"

#include <unistd.h>

#include <cerrno>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <iostream>
#include <memory>
#include <sstream>

#include "rimwatch/daemon/model_spec_toml.h"

namespace rimwatch::cli {
namespace {

using json = nlohmann::ordered_json;

constexpr const char* kModelDescription = "Add, drop or list the models rimwatchd monitors";

constexpr const char* kModelFooter =
    "\n  model add FILE.toml   check the spec (schemas/model.example.toml documents every key)\n"
    "                        and add it; the daemon estimates it at once on the history it\n"
    "                        already stores for the model's series\n"
    "  model drop MODEL      stop monitoring MODEL; its records stay in the store\n"
    "  model list            the active models: variables, lags, rows, last period, stale\n"
    "--json prints the daemon's reply as received. On a terminal list prints an aligned table,\n"
    "else tab-separated columns with a header line.\n"
    "\n"
    "Example:\n"
    "  rimwatch model add desk.toml\n"
    "  rimwatch model list\n"
    "  rimwatch model drop desk\n"
    "\n"
    "Alerts are statistical evidence, not trading or policy advice.\n"
    "\n";

bool ReadSpecFile(const std::string& path, std::string* text, std::string* error) {
  std::error_code ec;
  if (std::filesystem::is_directory(path, ec)) {
    *error = path + ": is a directory, not a model spec";
    return false;
  }
  std::ifstream in(path, std::ios::binary);
  if (!in) {
    *error = path + ": cannot open for reading (" + std::strerror(errno) + ")";
    return false;
  }
  std::ostringstream s;
  s << in.rdbuf();
  *text = s.str();
  return true;
}

std::string Join(const json& list) {
  std::string out;
  for (const json& x : list) out += (out.empty() ? "" : ",") + Text(x);
  return out;
}

int Add(const ModelCommandOptions& options, std::ostream& out, std::ostream& err) {
  std::string text, error;
  if (!ReadSpecFile(options.file, &text, &error)) {
    err << error << "\n";
    return kExitBadInput;
  }
  ModelSpec spec;
  const Status st = ParseModelSpecToml(text, options.file, &spec);
  if (!st.ok()) {
    err << st.message() << "\n";
    return kExitBadInput;
  }
  Reply reply;
  if (!CallDaemon(options.connection, json{{"type", "model.add"}, {"spec", text}}, &reply,
                  &error)) {
    err << "rimwatch model add: " << error << "\n";
    return kExitUnreachable;
  }
  if (!reply.ok()) {
    err << "rimwatch model add: " << options.file << ": refused: " << RefusalText(reply) << "\n";
    return kExitRefused;
  }
  if (options.json) {
    out << reply.raw << "\n";
  } else {
    out << "model " << Text(reply.doc.value("model", json())) << " added ("
        << spec.var.variables.size() << " variables, VAR(" << spec.var.lags << ")); "
        << Text(reply.doc.value("rows", json())) << " rows estimated from stored history\n";
  }
  return kExitOk;
}

int Drop(const ModelCommandOptions& options, std::ostream& out, std::ostream& err) {
  Reply reply;
  std::string error;
  if (!CallDaemon(options.connection, json{{"type", "model.drop"}, {"model", options.model}},
                  &reply, &error)) {
    err << "rimwatch model drop: " << error << "\n";
    return kExitUnreachable;
  }
  if (!reply.ok()) {
    err << "rimwatch model drop: refused: " << RefusalText(reply) << "\n";
    return kExitRefused;
  }
  if (options.json) {
    out << reply.raw << "\n";
  } else {
    out << "model " << options.model << " dropped (its records stay in the store)\n";
  }
  return kExitOk;
}

int List(const ModelCommandOptions& options, std::ostream& out, std::ostream& err) {
  Reply reply;
  std::string error;
  if (!CallDaemon(options.connection, json{{"type", "model.list"}}, &reply, &error)) {
    err << "rimwatch model list: " << error << "\n";
    return kExitUnreachable;
  }
  if (!reply.ok()) {
    err << "rimwatch model list: refused: " << RefusalText(reply) << "\n";
    return kExitRefused;
  }
  if (options.json) {
    out << reply.raw << "\n";
    return kExitOk;
  }
  const json models = reply.doc.value("models", json::array());
  const bool tty = TerminalStyle::For(STDOUT_FILENO).tty;
  if (models.empty() && tty) {
    out << "no active models (add one with `rimwatch model add FILE.toml`)\n";
    return kExitOk;
  }
  WriteModelTable(models, /*spec=*/true, tty, out);
  return kExitOk;
}

}  // namespace

void WriteModelTable(const json& models, bool spec, bool aligned, std::ostream& out) {
  std::vector<std::string> header = {"model"};
  if (spec) header.insert(header.end(), {"variables", "lags"});
  header.insert(header.end(), {"rows", "last_period", "stale"});
  TextTable table(header);
  for (const json& m : models) {
    std::vector<std::string> row = {Text(m.value("name", json()))};
    if (spec) {
      row.insert(row.end(),
                 {Join(m.value("variables", json::array())), Text(m.value("lags", json()))});
    }
    row.insert(row.end(), {Text(m.value("rows", json())), Text(m.value("last_period", json())),
                           m.value("stale", false) ? "stale" : "-"});
    table.Add(row);
  }
  table.Write(out, aligned, aligned ? "  " : "");
}

int RunModel(const ModelCommandOptions& options, std::ostream& out, std::ostream& err) {
  if (options.action == "add") return Add(options, out, err);
  if (options.action == "drop") return Drop(options, out, err);
  return List(options, out, err);
}

Command RegisterModelCommand(CLI::App* parent) {
  auto options = std::make_shared<ModelCommandOptions>();
  CLI::App* sub = parent->add_subcommand("model", kModelDescription);
  sub->require_subcommand(1);
  CLI::App* add = sub->add_subcommand("add", "check a model spec and add it to rimwatchd");
  add->add_option("file", options->file, "model spec (TOML)")->required()->type_name("FILE.toml");
  CLI::App* drop = sub->add_subcommand("drop", "stop monitoring a model");
  drop->add_option("model", options->model, "model name")->required()->type_name("MODEL");
  CLI::App* list = sub->add_subcommand("list", "list the active models");
  for (CLI::App* app : {add, drop, list}) {
    app->add_flag("--json", options->json, "print the daemon's reply as is");
    AddConnectionOptions(app, &options->connection, Sockets::kIngest);
    app->footer(std::string(kModelFooter) + kDaemonExitCodeHelp);
  }
  sub->footer(std::string(kModelFooter) + kDaemonExitCodeHelp);
  return Command{sub, [options, add, drop] {
                   options->action = add->parsed() ? "add" : drop->parsed() ? "drop" : "list";
                   return RunModel(*options, std::cout, std::cerr);
                 }};
}

}  // namespace rimwatch::cli
