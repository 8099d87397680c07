#include "feed_command.h"

#include <unistd.h>

#include <algorithm>
#include <atomic>
#include <cerrno>
#include <charconv>
#include <chrono>
#include <cmath>
#include <csignal>
#include <cstdio>
#include <cstring>
#include <deque>
#include <filesystem>
#include <fstream>
#include <iostream>
#include <map>
#include <memory>
#include <sstream>
#include <thread>

#include "csv_table.h"

namespace rimwatch::cli {
namespace {

using json = nlohmann::ordered_json;
using Clock = std::chrono::steady_clock;

constexpr const char* kFeedDescription = "Send a CSV of observations to rimwatchd";

constexpr const char* kFeedFooter =
    "\nReads FILE (or stdin for '-') whole, checks it, then sends it to rimwatchd with up to\n"
    "--in-flight requests unanswered at once. An acknowledgement means the observation is on\n"
    "disk. Input that is not acknowledged in time (no reply within --timeout, or a dropped\n"
    "connection) is sent again after reconnecting: the daemon stores an identical value once\n"
    "and counts a repeat as a duplicate, so resending, or feeding the same file twice, is safe.\n"
    "When 3 such resends in a row bring no reply at all, the feed gives up (exit 5).\n"
    "\n"
    "Wide CSV (default): the dialect of `rimwatch fit`; every column is a series and each line\n"
    "becomes one row request. A first column named 'period' gives the periods: an integer\n"
    "(-?[0-9]+) is sent as a number, any other text as a string that the daemon reads as a\n"
    "date (YYYY-MM-DD) or a timestamp with a zone (YYYY-MM-DDTHH:MM[:SS]Z or +hh:mm). Without\n"
    "it the periods are the data row numbers 1, 2, ... --columns a,b sends only those columns.\n"
    "\n"
    "Long CSV (--series): columns series, period, value and optionally released_at (a\n"
    "timestamp with a zone; may be empty), in any order; each line is one observation.\n"
    "A later line for the same series and period with another value is a revision.\n"
    "\n"
    "--rate N sends at most N requests (lines) per second: a history replayed in real time.\n"
    "Progress (sent, acknowledged, rate, time left) shows on stderr when it is a terminal.\n"
    "At the end a summary goes to stderr: requests sent and acknowledged, observations stored,\n"
    "duplicates and revisions (late values of older periods included), and requests refused by\n"
    "code; every refusal names its line.\n"
    "\n"
    "Example:\n"
    "  rimwatch feed history.csv\n"
    "  rimwatch feed --series --rate 50 releases.csv --endpoint ipc:///run/rimwatch/ingest\n"
    "  producer | rimwatch feed - --columns a,b\n"
    "\n"
    "Alerts are statistical evidence, not trading or policy advice.\n"
    "\n";

// Refusals printed one by one; the rest are only counted.
constexpr int kRefusalsShown = 10;

std::atomic<bool> g_interrupted{false};
extern "C" void OnFeedInterrupt(int) { g_interrupted.store(true); }

// One request of the feed: the JSON object without its seq, and where it came from.
struct Message {
  std::string body;  // "{...}" without "seq"
  int line = 0;      // physical line in the input
  int observations = 0;
};

// A period field: an integer text as a JSON integer, any other text as a string.
json PeriodJson(std::string_view text) {
  std::string_view digits = text;
  if (!digits.empty() && digits.front() == '-') digits.remove_prefix(1);
  if (!digits.empty() && digits.find_first_not_of("0123456789") == std::string_view::npos) {
    std::int64_t value = 0;
    const auto [ptr, ec] = std::from_chars(text.data(), text.data() + text.size(), value);
    if (ec == std::errc() && ptr == text.data() + text.size()) return value;
  }
  return std::string(text);
}

bool ReadInput(const std::string& path, std::istream& in, std::string* text, std::string* error) {
  if (path == "-") {
    std::ostringstream s;
    s << in.rdbuf();
    *text = s.str();
    return true;
  }
  std::error_code ec;
  if (std::filesystem::is_directory(path, ec)) {
    *error = path + ": is a directory, not a CSV file";
    return false;
  }
  std::ifstream file(path, std::ios::binary);
  if (!file) {
    *error = path + ": cannot open for reading (" + std::strerror(errno) + ")";
    return false;
  }
  std::ostringstream s;
  s << file.rdbuf();
  *text = s.str();
  return true;
}

// ---- wide CSV ---------------------------------------------------------------------------------

bool WideMessages(const std::string& text, const std::string& path,
                  const std::vector<std::string>& only, std::vector<Message>* out,
                  std::string* error) {
  CsvTable table;
  CsvError csv_error;
  if (!ParseCsvTable(text, path, &table, &csv_error)) {
    *error = csv_error.ToString();
    return false;
  }
  std::vector<std::size_t> cols;
  if (only.empty()) {
    for (std::size_t c = 0; c < table.cols(); ++c) cols.push_back(c);
  } else {
    for (const std::string& name : only) {
      const auto it = std::find(table.names.begin(), table.names.end(), name);
      if (it == table.names.end()) {
        *error =
            CsvError{path, table.header_line, "--columns: no column '" + name + "'"}.ToString();
        return false;
      }
      cols.push_back(static_cast<std::size_t>(it - table.names.begin()));
    }
  }
  out->reserve(table.rows());
  for (std::size_t r = 0; r < table.rows(); ++r) {
    json values = json::object();
    for (std::size_t c : cols) values[table.names[c]] = table.value(r, c);
    json body = {{"type", "row"},
                 {"period", table.has_period ? PeriodJson(table.periods[r])
                                             : json(static_cast<std::int64_t>(r + 1))},
                 {"values", std::move(values)}};
    out->push_back({body.dump(), table.lines[r], static_cast<int>(cols.size())});
  }
  return true;
}

// ---- long CSV ---------------------------------------------------------------------------------
// The dialect of csv_table.h (comments, trimming, CRLF, BOM, no quotes, blank lines only at the
// end), with text columns series, period, released_at and one number column value.

// As csv_table.cc: [+-]digits[.digits][(e|E)[+-]digits], finite, correctly rounded.
bool ParseValue(std::string_view field, double* out) {
  if (field.empty() || field.find_first_not_of("0123456789.eE+-") != std::string_view::npos) {
    return false;
  }
  if (field.front() == '+') {
    field.remove_prefix(1);
    if (field.empty() || field.front() == '+' || field.front() == '-') return false;
  }
  const auto [ptr, ec] = std::from_chars(field.data(), field.data() + field.size(), *out);
  return ec == std::errc() && ptr == field.data() + field.size() && std::isfinite(*out);
}

class LongReader {
 public:
  LongReader(std::string path, std::vector<Message>* out) : path_(std::move(path)), out_(out) {}

  bool Read(std::string_view text, std::string* error) {
    int line_no = 0;
    std::size_t start = 0;
    while (start < text.size()) {
      std::size_t end = text.find('\n', start);
      if (end == std::string_view::npos) end = text.size();
      if (!Line(++line_no, text.substr(start, end - start))) break;
      start = end + 1;
    }
    if (why_.empty() && col_series_ < 0) Fail(std::max(line_no, 1), "no header line");
    if (why_.empty() && out_->empty()) Fail(std::max(line_no, 1), "no observations");
    if (!why_.empty()) *error = CsvError{path_, line_, why_}.ToString();
    return why_.empty();
  }

 private:
  bool Fail(int line, std::string why) {
    line_ = line;
    why_ = std::move(why);
    return false;
  }

  bool Line(int line_no, std::string_view raw) {
    if (!raw.empty() && raw.back() == '\r') raw.remove_suffix(1);
    if (line_no == 1 && raw.substr(0, 3) == "\xEF\xBB\xBF") raw.remove_prefix(3);
    const std::string_view text = TrimCsvField(raw);
    if (text.empty()) {
      if (col_series_ >= 0 && blank_ == 0) blank_ = line_no;
      return true;
    }
    if (text.front() == '#') return true;
    if (text.find('"') != std::string_view::npos) {
      return Fail(line_no, "quoted fields are not supported (found '\"'); write plain fields");
    }
    if (blank_ != 0) {
      return Fail(blank_, "blank line between observations (blank lines only at the end)");
    }
    const std::vector<std::string_view> fields = SplitCsvFields(text);
    return col_series_ < 0 ? Header(line_no, fields) : Row(line_no, fields);
  }

  bool Header(int line_no, const std::vector<std::string_view>& fields) {
    std::map<std::string_view, int*> known = {{"series", &col_series_},
                                              {"period", &col_period_},
                                              {"value", &col_value_},
                                              {"released_at", &col_released_}};
    for (std::size_t c = 0; c < fields.size(); ++c) {
      const auto it = known.find(fields[c]);
      if (it == known.end()) {
        return Fail(line_no, "header column " + std::to_string(c + 1) + " '" +
                                 std::string(fields[c]) +
                                 "': --series expects the columns series, period, value and "
                                 "optionally released_at");
      }
      if (*it->second >= 0) {
        return Fail(line_no, "duplicate header column '" + std::string(fields[c]) + "'");
      }
      *it->second = static_cast<int>(c);
    }
    for (const char* name : {"series", "period", "value"}) {
      if (*known[name] < 0) return Fail(line_no, std::string("no column '") + name + "'");
    }
    columns_ = fields.size();
    return true;
  }

  bool Row(int line_no, const std::vector<std::string_view>& fields) {
    if (fields.size() != columns_) {
      return Fail(line_no, "ragged line: " + std::to_string(fields.size()) +
                               " fields, but the header has " + std::to_string(columns_));
    }
    const std::string_view series = fields[static_cast<std::size_t>(col_series_)];
    const std::string_view period = fields[static_cast<std::size_t>(col_period_)];
    const std::string_view value = fields[static_cast<std::size_t>(col_value_)];
    if (series.empty()) return Fail(line_no, "empty series name");
    if (period.empty()) return Fail(line_no, "empty period");
    double v = 0.0;
    if (!ParseValue(value, &v)) {
      return Fail(line_no,
                  "column 'value': '" + std::string(value) + "' is not a finite decimal number");
    }
    json body = {{"type", "obs"},
                 {"series", std::string(series)},
                 {"period", PeriodJson(period)},
                 {"value", v}};
    if (col_released_ >= 0 && !fields[static_cast<std::size_t>(col_released_)].empty()) {
      body["released_at"] = std::string(fields[static_cast<std::size_t>(col_released_)]);
    }
    out_->push_back({body.dump(), line_no, 1});
    return true;
  }

  std::string path_;
  std::vector<Message>* out_;
  int col_series_ = -1, col_period_ = -1, col_value_ = -1, col_released_ = -1;
  std::size_t columns_ = 0;
  int blank_ = 0;
  int line_ = 0;
  std::string why_;
};

// ---- sending ----------------------------------------------------------------------------------

enum class State { kPending, kInFlight, kQueued, kDone };

struct Tally {
  std::int64_t sent = 0;                                   // requests sent at least once
  std::int64_t resent = 0;                                 // sends after the first
  std::int64_t acked = 0;                                  // answered ok
  std::int64_t stored = 0, duplicates = 0, revisions = 0;  // observations, from the acks
  std::map<std::string, std::int64_t> refused;             // requests, by code
  std::int64_t refused_total = 0;
  int reconnects = 0;
};

std::string FormatSeconds(double s) {
  char buf[32];
  if (s < 10) {
    std::snprintf(buf, sizeof buf, "%.2f s", s);
  } else if (s < 100) {
    std::snprintf(buf, sizeof buf, "%.1f s", s);
  } else {
    std::snprintf(buf, sizeof buf, "%d:%02d", static_cast<int>(s) / 60, static_cast<int>(s) % 60);
  }
  return buf;
}

class Feeder {
 public:
  Feeder(const FeedCommandOptions& options, const std::string& path, std::vector<Message> messages,
         std::ostream& err)
      : options_(options),
        path_(path),
        messages_(std::move(messages)),
        err_(err),
        state_(messages_.size(), State::kPending) {}

  int Run() {
    std::string error;
    if (!DaemonClient::Open(options_.connection.endpoint, &client_, &error)) {
      err_ << "rimwatch feed: " << error << "\n";
      return kExitUnreachable;
    }
    start_ = Clock::now();
    const auto timeout = Timeout(options_.connection);
    switch (client_->WaitConnected(start_ + timeout, /*fail_fast=*/true)) {
      case ConnectState::kConnected:
        break;
      case ConnectState::kRefused:
        err_ << "rimwatch feed: cannot reach rimwatchd at " << options_.connection.endpoint
             << ": nothing is listening there (is rimwatchd running? see --endpoint); nothing "
                "was sent\n";
        return kExitUnreachable;
      case ConnectState::kTimedOut:
        err_ << "rimwatch feed: no connection to rimwatchd at " << options_.connection.endpoint
             << " within " << Num(options_.connection.timeout_s, 4) << " s; nothing was sent\n";
        return kExitUnreachable;
    }
    last_reply_ = Clock::now();
    Loop();
    if (options_.progress) err_ << "\r\033[K" << std::flush;
    return Summary();
  }

 private:
  bool AllDone() const { return done_ == messages_.size(); }

  // The next request to send: a resend first, then the next new one when pacing allows it.
  std::optional<std::size_t> NextToSend(Clock::time_point now) {
    while (!queue_.empty() && state_[queue_.front()] != State::kQueued) queue_.pop_front();
    if (!queue_.empty()) {
      const std::size_t i = queue_.front();
      queue_.pop_front();
      return i;
    }
    if (next_ >= messages_.size() || g_interrupted.load()) return std::nullopt;
    if (options_.rate > 0 && now < PacedTime(next_)) return std::nullopt;
    return next_++;
  }

  Clock::time_point PacedTime(std::size_t i) const {
    const double seconds = static_cast<double>(i) / options_.rate;
    return start_ +
           std::chrono::duration_cast<Clock::duration>(std::chrono::duration<double>(seconds));
  }

  void Requeue() {
    for (std::size_t i : in_flight_list_) {
      if (state_[i] == State::kInFlight) {
        state_[i] = State::kQueued;
        queue_.push_back(i);
      }
    }
    in_flight_list_.clear();
    in_flight_ = 0;
    std::sort(queue_.begin(), queue_.end());  // resend in input order
  }

  void SendSome() {
    while (in_flight_ < static_cast<std::size_t>(options_.in_flight)) {
      const auto now = Clock::now();
      const std::optional<std::size_t> pick = NextToSend(now);
      if (!pick) return;
      const std::size_t i = *pick;
      const std::string bytes =
          "{\"seq\":" + std::to_string(i + 1) + "," + messages_[i].body.substr(1);
      if (!client_->Send(bytes)) {
        // No connection can take it now: back to the queue, the loop waits for the connection.
        if (state_[i] == State::kPending && i + 1 == next_) {
          --next_;
        } else {
          state_[i] = State::kQueued;
          queue_.push_front(i);
        }
        return;
      }
      if (state_[i] == State::kPending) {
        ++tally_.sent;
      } else {
        ++tally_.resent;
      }
      state_[i] = State::kInFlight;
      in_flight_list_.push_back(i);
      ++in_flight_;
      if (in_flight_list_.size() > 4 * in_flight_ + 4096) {  // forget the answered ones
        std::erase_if(in_flight_list_,
                      [&](std::size_t j) { return state_[j] != State::kInFlight; });
      }
    }
  }

  void Take(const Reply& reply) {
    const std::optional<std::int64_t> seq = reply.seq();
    if (!seq || *seq < 1 || *seq > static_cast<std::int64_t>(messages_.size())) return;
    const std::size_t i = static_cast<std::size_t>(*seq - 1);
    if (state_[i] == State::kDone || state_[i] == State::kPending) return;  // a repeat answer
    if (state_[i] == State::kInFlight) --in_flight_;
    state_[i] = State::kDone;
    ++done_;
    last_reply_ = Clock::now();
    silent_rounds_ = 0;
    if (reply.ok()) {
      ++tally_.acked;
      const auto count = [&](const char* key) {
        const auto it = reply.doc.find(key);
        return it != reply.doc.end() && it->is_number_integer() ? it->get<std::int64_t>() : 0;
      };
      tally_.stored += count("stored");
      tally_.duplicates += count("duplicates");
      tally_.revisions += count("revisions") + count("late");
      return;
    }
    const std::string code = reply.code().empty() ? "unknown" : reply.code();
    ++tally_.refused[code];
    if (++tally_.refused_total <= kRefusalsShown) {
      if (options_.progress) err_ << "\r\033[K";
      err_ << CsvError{path_, messages_[i].line, "refused: " + RefusalText(reply)}.ToString()
           << "\n";
    }
  }

  // Waits for the connection after a drop; false when it does not come back in time.
  bool Reconnected() {
    const auto deadline = Clock::now() + Timeout(options_.connection);
    if (options_.progress) err_ << "\r\033[K";
    err_ << "rimwatch feed: connection to " << options_.connection.endpoint
         << " lost; waiting for it (" << in_flight_ << " requests to resend)\n";
    Requeue();
    ++tally_.reconnects;
    if (client_->WaitConnected(deadline, false) != ConnectState::kConnected) return false;
    last_reply_ = Clock::now();
    return true;
  }

  // After a timeout: a fresh socket (late replies to the old one are dropped with it), then
  // everything unanswered again. False (and gave_up_) when no connection comes in time.
  bool Reopened() {
    if (options_.progress) err_ << "\r\033[K";
    err_ << "rimwatch feed: no reply within " << Num(options_.connection.timeout_s, 4)
         << " s; reconnecting to resend " << in_flight_ << " requests\n";
    Requeue();
    ++tally_.reconnects;
    std::string error;
    if (!client_->Reopen(&error)) {
      gave_up_ = error;
      return false;
    }
    const auto deadline = Clock::now() + Timeout(options_.connection);
    if (client_->WaitConnected(deadline, false) != ConnectState::kConnected) {
      gave_up_ = "no connection to " + options_.connection.endpoint + " within --timeout";
      return false;
    }
    client_->watch().TakeDropped();
    last_reply_ = Clock::now();
    return true;
  }

  void Loop() {
    const auto timeout = Timeout(options_.connection);
    auto last_progress = Clock::now();
    while (!AllDone()) {
      if (g_interrupted.load() && in_flight_ == 0) break;
      if (client_->watch().TakeDropped() || !client_->watch().connected()) {
        if (!Reconnected()) {
          gave_up_ = "the connection did not come back within --timeout";
          return;
        }
      }
      SendSome();
      auto wait = std::chrono::milliseconds(100);
      if (in_flight_ == 0 && options_.rate > 0 && next_ < messages_.size()) {
        const auto until =
            std::chrono::duration_cast<std::chrono::milliseconds>(PacedTime(next_) - Clock::now());
        wait = std::clamp(until, std::chrono::milliseconds(0), wait);
      }
      std::optional<Reply> reply = client_->Receive(wait);
      while (reply) {
        Take(*reply);
        reply = client_->Receive(std::chrono::milliseconds(0));
      }
      const auto now = Clock::now();
      if (in_flight_ > 0 && now - last_reply_ > timeout) {
        if (++silent_rounds_ > kMaxSilentRounds) {
          gave_up_ = "no reply for " + std::to_string(kMaxSilentRounds) + " rounds of --timeout";
          return;
        }
        if (!Reopened()) return;
      }
      if (options_.progress && now - last_progress > std::chrono::milliseconds(250)) {
        last_progress = now;
        Progress(now);
      }
    }
  }

  void Progress(Clock::time_point now) {
    const double elapsed = std::chrono::duration<double>(now - start_).count();
    const double rate = elapsed > 0 ? static_cast<double>(done_) / elapsed : 0.0;
    const double left = static_cast<double>(messages_.size() - done_);
    err_ << "\r\033[Kfeed: " << tally_.sent << "/" << messages_.size() << " sent, " << done_
         << " answered, " << static_cast<std::int64_t>(rate) << "/s";
    if (rate > 0) err_ << ", " << FormatSeconds(left / rate) << " left";
    err_ << std::flush;
  }

  int Summary() {
    const double elapsed = std::chrono::duration<double>(Clock::now() - start_).count();
    const std::int64_t total = static_cast<std::int64_t>(messages_.size());
    const std::int64_t unacked = total - tally_.acked - tally_.refused_total;
    if (tally_.refused_total > kRefusalsShown) {
      err_ << "(" << (tally_.refused_total - kRefusalsShown) << " more refusals not shown)\n";
    }
    if (!gave_up_.empty()) err_ << "rimwatch feed: gave up: " << gave_up_ << "\n";
    if (g_interrupted.load()) err_ << "rimwatch feed: interrupted\n";
    std::ostringstream s;
    s << "feed: " << total << " requests, sent " << tally_.sent << ", acked " << tally_.acked
      << " (stored " << tally_.stored << ", duplicates " << tally_.duplicates << ", revisions "
      << tally_.revisions << "), refused " << tally_.refused_total;
    if (!tally_.refused.empty()) {
      s << " (";
      bool first = true;
      for (const auto& [code, n] : tally_.refused) {
        s << (first ? "" : ", ") << code << " " << n;
        first = false;
      }
      s << ")";
    }
    s << ", unacked " << unacked << ", resent " << tally_.resent << ", in "
      << FormatSeconds(elapsed);
    err_ << s.str() << "\n";
    if (unacked > 0) return kExitUnreachable;
    if (tally_.refused_total > 0) return kExitRefused;
    return kExitOk;
  }

  const FeedCommandOptions& options_;
  std::string path_;
  std::vector<Message> messages_;
  std::ostream& err_;
  std::vector<State> state_;
  std::unique_ptr<DaemonClient> client_;
  std::deque<std::size_t> queue_;            // to resend, input order
  std::vector<std::size_t> in_flight_list_;  // sent on the current connection (some answered)
  std::size_t in_flight_ = 0;
  std::size_t next_ = 0;  // first request never sent
  std::size_t done_ = 0;
  Clock::time_point start_;
  Clock::time_point last_reply_;
  int silent_rounds_ = 0;
  std::string gave_up_;
  Tally tally_;
};

}  // namespace

int RunFeed(const FeedCommandOptions& options, std::istream& in, std::ostream& err) {
  if (options.in_flight < 1 || options.in_flight > 100000) {
    err << "rimwatch feed: --in-flight " << options.in_flight << ": must lie in 1..100000\n";
    return kExitBadInput;
  }
  if (!(options.rate >= 0) || !std::isfinite(options.rate)) {
    err << "rimwatch feed: --rate " << options.rate << ": must be a finite number >= 0\n";
    return kExitBadInput;
  }
  if (options.series && !options.columns.empty()) {
    err << "rimwatch feed: --columns applies to the wide format, not to --series\n";
    return kExitBadInput;
  }
  const std::string path = options.input == "-" ? "<stdin>" : options.input;
  std::string text, error;
  if (!ReadInput(options.input, in, &text, &error)) {
    err << error << "\n";
    return kExitBadInput;
  }
  if (text.size() > kMaxCsvBytes) {
    err << path << ": " << text.size() << " bytes; the limit is " << kMaxCsvBytes << "\n";
    return kExitBadInput;
  }
  std::vector<Message> messages;
  const bool parsed = options.series ? LongReader(path, &messages).Read(text, &error)
                                     : WideMessages(text, path, options.columns, &messages, &error);
  if (!parsed) {
    err << error << "\n";
    return kExitBadInput;
  }
  g_interrupted.store(false);
  struct sigaction action {};
  struct sigaction previous {};
  action.sa_handler = OnFeedInterrupt;
  sigemptyset(&action.sa_mask);
  sigaction(SIGINT, &action, &previous);
  Feeder feeder(options, path, std::move(messages), err);
  const int code = feeder.Run();
  sigaction(SIGINT, &previous, nullptr);
  return code;
}

Command RegisterFeedCommand(CLI::App* parent) {
  auto options = std::make_shared<FeedCommandOptions>();
  CLI::App* sub = parent->add_subcommand("feed", kFeedDescription);
  sub->add_option("input", options->input, "CSV file to send, or - for stdin")
      ->required()
      ->type_name("FILE");
  sub->add_flag("--series", options->series,
                "long format: columns series, period, value[, released_at]");
  sub->add_option("--columns", options->columns, "wide format: send only these columns")
      ->delimiter(',')
      ->type_name("A,B,...");
  sub->add_option("--in-flight", options->in_flight, "unanswered requests at most (1..100000)")
      ->capture_default_str();
  sub->add_option("--rate", options->rate, "requests (lines) per second at most; 0 = no pacing")
      ->capture_default_str()
      ->type_name("N");
  AddConnectionOptions(sub, &options->connection, Sockets::kIngest);
  sub->footer(std::string(kFeedFooter) + kDaemonExitCodeHelp);
  return Command{sub, [options] {
                   options->progress = isatty(STDERR_FILENO) != 0;
                   return RunFeed(*options, std::cin, std::cerr);
                 }};
}

}  // namespace rimwatch::cli
