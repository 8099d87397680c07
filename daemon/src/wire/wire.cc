#include "rimwatch/daemon/wire.h"

#include <cmath>
#include <exception>
#include <initializer_list>
#include <limits>
#include <unordered_set>
#include <utility>

#include "field_rules.h"

namespace rimwatch::daemon {
namespace {

using json = nlohmann::ordered_json;

using wire_rules::IsName;
using wire_rules::kMaxModelName;
using wire_rules::kMaxSeriesName;
using wire_rules::LooksLikeInteger;

constexpr std::size_t kMaxShown = 40;  // bytes of an offending value quoted in a message
constexpr const char* kRequestTypes =
    "obs, row, batch, model.add, model.drop, model.list, state, health";

// ---- message text

// Length of the well-formed UTF-8 sequence at text[i] (RFC 3629: no overlong forms, no
// surrogates, nothing above U+10FFFF), or 0.
std::size_t Utf8Length(std::string_view text, std::size_t i) {
  const auto byte = [&](std::size_t k) { return static_cast<unsigned char>(text[i + k]); };
  const unsigned char c = byte(0);
  std::size_t len = 0;
  unsigned char lo = 0x80, hi = 0xBF;  // range of the second byte
  if (c < 0x80) return 1;
  if (c >= 0xC2 && c <= 0xDF) len = 2;
  if (c >= 0xE0 && c <= 0xEF) len = 3;
  if (c >= 0xF0 && c <= 0xF4) len = 4;
  if (c == 0xE0) lo = 0xA0;
  if (c == 0xED) hi = 0x9F;
  if (c == 0xF0) lo = 0x90;
  if (c == 0xF4) hi = 0x8F;
  if (len == 0 || i + len > text.size() || byte(1) < lo || byte(1) > hi) return 0;
  for (std::size_t k = 2; k < len; ++k) {
    if ((byte(k) & 0xC0) != 0x80) return 0;
  }
  return len;
}

// Keeps well-formed UTF-8 and replaces anything else, and control characters, by '?', so a
// message quoting the peer's bytes is always valid text.
std::string Sanitized(std::string_view text) {
  std::string out;
  out.reserve(text.size());
  for (std::size_t i = 0; i < text.size();) {
    const std::size_t len = Utf8Length(text, i);
    if (len == 0 || static_cast<unsigned char>(text[i]) < 0x20) {
      out += '?';
      ++i;
    } else {
      out.append(text.substr(i, len));
      i += len;
    }
  }
  return out;
}

// The JSON text of a value, cut to about kMaxShown bytes at a character boundary.
std::string Shown(const json& value) {
  std::string text = value.dump(-1, ' ', false, json::error_handler_t::replace);
  if (text.size() <= kMaxShown) return text;
  std::size_t cut = kMaxShown;
  while (cut > 0 && (static_cast<unsigned char>(text[cut]) & 0xC0) == 0x80) --cut;
  return text.substr(0, cut) + "...";
}

std::string Quoted(std::string_view text) { return Shown(json(std::string(text))); }

std::string Join(const std::string& prefix, std::string_view field) {
  std::string out = prefix;
  if (!out.empty()) out += '.';
  out.append(field);
  return out;
}

// ---- JSON parsing: the one place an nlohmann exception is caught

// A first pass over the text with nlohmann's SAX interface (no document is built). It follows the
// parser through the document (object keys, array indices), so that a duplicate key or a failure
// inside the parser (bad syntax, a number outside the double range) can be named by its field
// path, and it picks up the top-level "seq" as soon as it is read, so even a message that breaks
// later can echo it. Only a text it accepts is then parsed into a document. (nlohmann's parser
// callback could do the same in one pass, but it rescans the enclosing array after every
// element, which is quadratic in the items of a batch.)
class JsonScan : public nlohmann::json_sax<json> {
 public:
  bool null() override { return Scalar(); }
  bool boolean(bool) override { return Scalar(); }
  bool number_integer(number_integer_t v) override { return Scalar(v); }
  bool number_unsigned(number_unsigned_t v) override {
    if (v > static_cast<number_unsigned_t>(std::numeric_limits<std::int64_t>::max())) {
      return Scalar();
    }
    return Scalar(static_cast<std::int64_t>(v));
  }
  bool number_float(number_float_t, const string_t&) override { return Scalar(); }
  bool string(string_t&) override { return Scalar(); }
  bool binary(binary_t&) override { return Scalar(); }
  bool start_object(std::size_t) override {
    frames_.push_back(Frame{});
    return true;
  }
  bool key(string_t& key) override {
    Frame& f = frames_.back();
    f.key = key;
    f.has_key = true;
    if (!f.keys.insert(key).second) {
      if (duplicate_.empty()) duplicate_ = Path();
      if (frames_.size() == 1 && key == "seq") seq_duplicated_ = true;
    }
    return true;
  }
  bool end_object() override { return EndContainer(); }
  bool start_array(std::size_t) override {
    frames_.push_back(Frame{});
    frames_.back().is_array = true;
    return true;
  }
  bool end_array() override { return EndContainer(); }
  bool parse_error(std::size_t position, const std::string&,
                   const nlohmann::detail::exception& e) override {
    error_position_ = position;
    error_id_ = e.id;
    error_what_ = e.what();
    return false;
  }

  // The field path where the parser is now ("items[3].value"), empty at the top.
  std::string Path() const {
    std::string out;
    for (const Frame& f : frames_) {
      if (f.is_array) {
        out += '[' + std::to_string(f.index) + ']';
      } else if (f.has_key) {
        out = Join(out, f.key);
      }
    }
    return out;
  }

  const std::string& duplicate() const { return duplicate_; }
  // The top-level seq when it was read as an integer in range and not duplicated.
  std::optional<std::int64_t> seq() const { return seq_duplicated_ ? std::nullopt : seq_; }
  int error_id() const { return error_id_; }
  std::size_t error_position() const { return error_position_; }
  const std::string& error_what() const { return error_what_; }

 private:
  struct Frame {
    bool is_array = false;
    std::size_t index = 0;  // arrays: the element being read
    bool has_key = false;   // objects: a key has been read
    std::string key;        // objects: the last key read
    std::unordered_set<std::string> keys;
  };

  bool AtTopLevelSeq() const {
    return frames_.size() == 1 && !frames_.back().is_array && frames_.back().key == "seq";
  }
  bool Scalar(std::optional<std::int64_t> integer = std::nullopt) {
    if (AtTopLevelSeq()) seq_ = integer;
    ElementDone();
    return true;
  }
  bool EndContainer() {
    frames_.pop_back();
    if (AtTopLevelSeq()) seq_.reset();
    ElementDone();
    return true;
  }
  void ElementDone() {
    if (!frames_.empty() && frames_.back().is_array) ++frames_.back().index;
  }

  std::vector<Frame> frames_;
  std::string duplicate_;  // path of the first duplicate key, empty if none
  bool seq_duplicated_ = false;
  std::optional<std::int64_t> seq_;
  int error_id_ = 0;  // nlohmann's exception id of a failure, 0 if none
  std::size_t error_position_ = 0;
  std::string error_what_;
};

// nlohmann's exception text without its "[json.exception.parse_error.101] " tag and position.
std::string_view Detail(std::string_view text) {
  const std::size_t tag = text.find("] ");
  if (!text.empty() && text[0] == '[' && tag != std::string_view::npos) text.remove_prefix(tag + 2);
  const std::size_t at = text.find(": ");
  if (text.substr(0, 15) == "parse error at " && at != std::string_view::npos) {
    text.remove_prefix(at + 2);
  }
  return text;
}

struct Parsed {
  json doc;
  bool ok = false;
  WireError error;
};

Parsed ParseJson(std::string_view bytes, JsonScan* scan) {
  Parsed out;
  bool scanned = false;
  try {
    scanned = json::sax_parse(bytes.begin(), bytes.end(), scan);
    if (scanned) {
      out.doc = json::parse(bytes.begin(), bytes.end());
      out.ok = true;
      return out;
    }
  } catch (const json::exception& e) {
    // Not expected: the scan reports every syntax error through parse_error().
    out.error = WireError{ErrorCode::kBadJson, "not valid JSON: " + Sanitized(Detail(e.what()))};
    return out;
  }
  const std::string path = scan->Path();
  if (scan->error_id() == 406) {
    // A number literal outside the double range ("1e999"): nlohmann refuses it mid-parse.
    out.error.code = ErrorCode::kNonFinite;
    out.error.message = (path.empty() ? "" : path + ": ") + "must be a finite number (" +
                        Sanitized(Detail(scan->error_what())) + ")";
  } else {
    out.error.code = ErrorCode::kBadJson;
    out.error.message = "not valid JSON at byte " + std::to_string(scan->error_position()) +
                        (path.empty() ? "" : " (at " + path + ")") + ": " +
                        Sanitized(Detail(scan->error_what()));
  }
  return out;
}

// ---- field rules

bool ReadInt64(const json& v, std::int64_t* out) {
  if (v.is_number_unsigned()) {
    const auto u = v.get<std::uint64_t>();
    if (u > static_cast<std::uint64_t>(std::numeric_limits<std::int64_t>::max())) return false;
    *out = static_cast<std::int64_t>(u);
    return true;
  }
  if (v.is_number_integer()) {
    *out = v.get<std::int64_t>();
    return true;
  }
  return false;
}

// ParsePeriod's message without its leading word: `"2026-02-30": day 30 is outside ...`.
std::string PeriodWhy(const Status& status) {
  std::string_view text(status.message());
  if (text.substr(0, 7) == "period ") text.remove_prefix(7);
  return std::string(text);
}

bool TypeFromName(std::string_view name, RequestType* out) {
  for (RequestType t : {RequestType::kObs, RequestType::kRow, RequestType::kBatch,
                        RequestType::kModelAdd, RequestType::kModelDrop, RequestType::kModelList,
                        RequestType::kState, RequestType::kHealth}) {
    if (name == RequestTypeName(t)) {
      *out = t;
      return true;
    }
  }
  return false;
}

// ---- the decoder of one request

class Decoder {
 public:
  Decoder(const DecodeOptions& options, Request* request, WireError* error)
      : options_(options), request_(request), error_(error) {}

  bool Fail(ErrorCode code, const std::string& path, const std::string& rule) {
    error_->code = code;
    error_->message = path.empty() ? rule : path + ": " + rule;
    return false;
  }

  bool DecodeMessage(const json& doc) {
    if (!doc.is_object()) {
      return Fail(ErrorCode::kBadJson, "",
                  std::string("the message must be a JSON object, not ") +
                      (doc.is_array()  ? "an array"
                       : doc.is_null() ? "null"
                                       : "a " + std::string(doc.type_name())));
    }
    const auto type_it = doc.find("type");
    if (type_it == doc.end()) return Fail(ErrorCode::kBadMessage, "type", "missing");
    if (!type_it->is_string()) {
      return Fail(ErrorCode::kBadMessage, "type", "must be a string (got " + Shown(*type_it) + ")");
    }
    const std::string& name = type_it->get_ref<const std::string&>();
    if (!TypeFromName(name, &request_->type)) {
      return Fail(ErrorCode::kUnknownType, "type",
                  Quoted(name) + " is not a request type (" + kRequestTypes + ")");
    }
    switch (request_->type) {
      case RequestType::kObs:
        return Fields(doc, "", {"type", "seq", "series", "period", "value", "released_at"},
                      "an obs request") &&
               DecodeObs(doc, "");
      case RequestType::kRow:
        return Fields(doc, "", {"type", "seq", "period", "values", "released_at"},
                      "a row request") &&
               DecodeRow(doc, "");
      case RequestType::kBatch:
        return Fields(doc, "", {"type", "seq", "items"}, "a batch request") && DecodeBatch(doc);
      case RequestType::kModelAdd:
        return Fields(doc, "", {"type", "seq", "spec"}, "a model.add request") && DecodeSpec(doc);
      case RequestType::kModelDrop:
        return Fields(doc, "", {"type", "seq", "model"}, "a model.drop request") &&
               DecodeModel(doc);
      case RequestType::kState:
        return Fields(doc, "", {"type", "seq", "model"}, "a state request") && DecodeModel(doc);
      case RequestType::kModelList:
        return Fields(doc, "", {"type", "seq"}, "a model.list request");
      case RequestType::kHealth:
        return Fields(doc, "", {"type", "seq"}, "a health request");
    }
    return Fail(ErrorCode::kInternal, "type", "unhandled request type");
  }

 private:
  // Every key of `object` is one of `allowed` (the first other key, in message order, is named).
  bool Fields(const json& object, const std::string& prefix,
              std::initializer_list<std::string_view> allowed, const char* what) {
    for (const auto& [key, value] : object.items()) {
      bool known = false;
      for (std::string_view a : allowed) known = known || key == a;
      if (known) continue;
      std::string list;
      for (std::string_view a : allowed) list += (list.empty() ? "" : ", ") + std::string(a);
      return Fail(ErrorCode::kBadMessage, Join(prefix, Sanitized(key)),
                  std::string("unexpected field (") + what + " has " + list + ")");
    }
    return true;
  }

  const json* Required(const json& object, const std::string& prefix, const char* field) {
    const auto it = object.find(field);
    if (it == object.end()) {
      Fail(ErrorCode::kBadMessage, Join(prefix, field), "missing");
      return nullptr;
    }
    return &*it;
  }

  bool SeriesName(const json& v, const std::string& path, std::string* out) {
    if (!v.is_string()) {
      return Fail(ErrorCode::kBadMessage, path, "must be a string (got " + Shown(v) + ")");
    }
    const std::string& text = v.get_ref<const std::string&>();
    if (!IsName(text, kMaxSeriesName, /*allow_colon=*/true)) {
      return Fail(
          ErrorCode::kBadMessage, path,
          Quoted(text) + " is not a series name (1 to 128 characters of A-Z a-z 0-9 _ . : -)");
    }
    *out = text;
    return true;
  }

  bool Number(const json& v, const std::string& path, double* out) {
    if (!v.is_number()) {
      return Fail(ErrorCode::kBadMessage, path, "must be a number (got " + Shown(v) + ")");
    }
    const double x = v.get<double>();
    if (!std::isfinite(x)) return Fail(ErrorCode::kNonFinite, path, "must be a finite number");
    *out = x;
    return true;
  }

  bool PeriodField(const json& v, const std::string& path, Period* out) {
    if (v.is_number_integer()) {
      std::int64_t key = 0;
      if (!ReadInt64(v, &key)) {
        return Fail(ErrorCode::kBadPeriod, path, Shown(v) + " is outside the 64-bit integer range");
      }
      *out = IntegerPeriod(key);
      return true;
    }
    if (v.is_number()) {
      return Fail(ErrorCode::kBadPeriod, path,
                  Shown(v) +
                      " is not an integer; a period is an integer, a date YYYY-MM-DD or a "
                      "timestamp YYYY-MM-DDTHH:MM[:SS[.ffffff]] with Z or +hh:mm / -hh:mm");
    }
    if (!v.is_string()) {
      return Fail(ErrorCode::kBadMessage, path,
                  "must be an integer or a date / timestamp string (got " + Shown(v) + ")");
    }
    const std::string& text = v.get_ref<const std::string&>();
    if (LooksLikeInteger(text)) {
      return Fail(
          ErrorCode::kBadPeriod, path,
          Quoted(text) + " is text; an integer period is sent as a JSON number (" + text + ")");
    }
    const Status st = ParsePeriod(text, out);
    if (!st.ok()) return Fail(ErrorCode::kBadPeriod, path, Sanitized(PeriodWhy(st)));
    return true;
  }

  // Optional "released_at" of an obs / row (request or batch item).
  bool ReleasedAt(const json& object, const std::string& prefix, std::string* out) {
    const auto it = object.find("released_at");
    if (it == object.end()) return true;
    const std::string path = Join(prefix, "released_at");
    if (!it->is_string()) {
      return Fail(ErrorCode::kBadMessage, path,
                  "must be a timestamp string (got " + Shown(*it) + ")");
    }
    const std::string& text = it->get_ref<const std::string&>();
    Period p;
    const Status st = ParsePeriod(text, &p);
    if (!st.ok()) return Fail(ErrorCode::kBadPeriod, path, Sanitized(PeriodWhy(st)));
    if (p.kind != PeriodKind::kTimestamp) {
      return Fail(ErrorCode::kBadPeriod, path,
                  Quoted(text) +
                      " is not a timestamp; a release time is YYYY-MM-DDTHH:MM[:SS[.ffffff]] with "
                      "Z or +hh:mm / -hh:mm");
    }
    *out = text;
    return true;
  }

  // {series, period, value, released_at?} at `prefix` (fields already checked).
  bool DecodeObs(const json& object, const std::string& prefix) {
    Observation obs;
    const json* series = Required(object, prefix, "series");
    if (series == nullptr || !SeriesName(*series, Join(prefix, "series"), &obs.series)) {
      return false;
    }
    const json* period = Required(object, prefix, "period");
    if (period == nullptr || !PeriodField(*period, Join(prefix, "period"), &obs.period)) {
      return false;
    }
    const json* value = Required(object, prefix, "value");
    if (value == nullptr || !Number(*value, Join(prefix, "value"), &obs.value)) return false;
    if (!ReleasedAt(object, prefix, &obs.released_at)) return false;
    request_->observations.push_back(std::move(obs));
    return true;
  }

  // {period, values:{series: value, ...}, released_at?} at `prefix` (fields already checked).
  bool DecodeRow(const json& object, const std::string& prefix) {
    Period period;
    const json* p = Required(object, prefix, "period");
    if (p == nullptr || !PeriodField(*p, Join(prefix, "period"), &period)) return false;
    const std::string values_path = Join(prefix, "values");
    const json* values = Required(object, prefix, "values");
    if (values == nullptr) return false;
    if (!values->is_object()) {
      return Fail(ErrorCode::kBadMessage, values_path,
                  "must be an object {series: value, ...} (got " + Shown(*values) + ")");
    }
    if (values->empty()) {
      return Fail(ErrorCode::kBadMessage, values_path, "must hold at least one series");
    }
    std::string released_at;
    const std::size_t first = request_->observations.size();
    for (const auto& [name, value] : values->items()) {
      Observation obs;
      if (!IsName(name, kMaxSeriesName, /*allow_colon=*/true)) {
        return Fail(
            ErrorCode::kBadMessage, values_path,
            Quoted(name) + " is not a series name (1 to 128 characters of A-Z a-z 0-9 _ . : -)");
      }
      if (!Number(value, Join(values_path, name), &obs.value)) return false;
      obs.series = name;
      obs.period = period;
      request_->observations.push_back(std::move(obs));
    }
    if (!ReleasedAt(object, prefix, &released_at)) return false;
    for (std::size_t i = first; i < request_->observations.size(); ++i) {
      request_->observations[i].released_at = released_at;
    }
    return true;
  }

  bool DecodeBatch(const json& doc) {
    const json* items = Required(doc, "", "items");
    if (items == nullptr) return false;
    if (!items->is_array()) {
      return Fail(ErrorCode::kBadMessage, "items",
                  "must be a list of obs / row items (got " + Shown(*items) + ")");
    }
    if (items->empty()) return Fail(ErrorCode::kBadMessage, "items", "must hold at least one item");
    if (items->size() > options_.max_batch_items) {
      return Fail(ErrorCode::kTooLarge, "items",
                  std::to_string(items->size()) + " items; at most " +
                      std::to_string(options_.max_batch_items) + " in one batch");
    }
    for (std::size_t i = 0; i < items->size(); ++i) {
      const json& item = (*items)[i];
      const std::string prefix = "items[" + std::to_string(i) + "]";
      if (!item.is_object()) {
        return Fail(ErrorCode::kBadMessage, prefix,
                    "must be an object: {series, period, value} or {period, values} (got " +
                        Shown(item) + ")");
      }
      const bool ok =
          item.contains("values")
              ? Fields(item, prefix, {"period", "values", "released_at"}, "a row item") &&
                    DecodeRow(item, prefix)
              : Fields(item, prefix, {"series", "period", "value", "released_at"}, "an obs item") &&
                    DecodeObs(item, prefix);
      if (!ok) return false;
    }
    return true;
  }

  bool DecodeSpec(const json& doc) {
    const json* spec = Required(doc, "", "spec");
    if (spec == nullptr) return false;
    if (!spec->is_string()) {
      return Fail(ErrorCode::kBadMessage, "spec",
                  "must be the model spec as TOML text (got " + Shown(*spec) + ")");
    }
    if (spec->get_ref<const std::string&>().empty()) {
      return Fail(ErrorCode::kBadMessage, "spec", "must not be empty");
    }
    request_->spec_text = spec->get<std::string>();
    return true;
  }

  bool DecodeModel(const json& doc) {
    const json* model = Required(doc, "", "model");
    if (model == nullptr) return false;
    if (!model->is_string()) {
      return Fail(ErrorCode::kBadMessage, "model", "must be a string (got " + Shown(*model) + ")");
    }
    const std::string& name = model->get_ref<const std::string&>();
    if (!IsName(name, kMaxModelName, /*allow_colon=*/false)) {
      return Fail(ErrorCode::kBadMessage, "model",
                  Quoted(name) + " is not a model name (1 to 64 characters of A-Z a-z 0-9 _ . -)");
    }
    request_->model = name;
    return true;
  }

  const DecodeOptions& options_;
  Request* request_;
  WireError* error_;
};

std::string Dump(const json& j) { return j.dump(-1, ' ', false, json::error_handler_t::replace); }

json SeqJson(const std::optional<std::int64_t>& seq) { return seq ? json(*seq) : json(nullptr); }

json FiniteOrNull(double x) { return std::isfinite(x) ? json(x) : json(nullptr); }

}  // namespace

std::string_view ErrorCodeName(ErrorCode code) {
  switch (code) {
    case ErrorCode::kBadJson:
      return "bad_json";
    case ErrorCode::kBadMessage:
      return "bad_message";
    case ErrorCode::kUnknownType:
      return "unknown_type";
    case ErrorCode::kNonFinite:
      return "non_finite";
    case ErrorCode::kBadPeriod:
      return "bad_period";
    case ErrorCode::kPeriodKind:
      return "period_kind";
    case ErrorCode::kTooLarge:
      return "too_large";
    case ErrorCode::kUnknownSeries:
      return "unknown_series";
    case ErrorCode::kUnknownModel:
      return "unknown_model";
    case ErrorCode::kBadSpec:
      return "bad_spec";
    case ErrorCode::kModelExists:
      return "model_exists";
    case ErrorCode::kStorage:
      return "storage";
    case ErrorCode::kInternal:
      return "internal";
  }
  return "internal";
}

bool ErrorCodeFromName(std::string_view name, ErrorCode* out) {
  for (int i = 0; i < kErrorCodeCount; ++i) {
    const auto code = static_cast<ErrorCode>(i);
    if (ErrorCodeName(code) == name) {
      *out = code;
      return true;
    }
  }
  return false;
}

std::string_view RequestTypeName(RequestType type) {
  switch (type) {
    case RequestType::kObs:
      return "obs";
    case RequestType::kRow:
      return "row";
    case RequestType::kBatch:
      return "batch";
    case RequestType::kModelAdd:
      return "model.add";
    case RequestType::kModelDrop:
      return "model.drop";
    case RequestType::kModelList:
      return "model.list";
    case RequestType::kState:
      return "state";
    case RequestType::kHealth:
      return "health";
  }
  return "unknown";
}

bool DecodeRequest(std::string_view bytes, const DecodeOptions& options, Request* request,
                   WireError* error) {
  *request = Request{};
  if (bytes.size() > options.max_bytes) {
    error->code = ErrorCode::kTooLarge;
    error->message = "the message is " + std::to_string(bytes.size()) + " bytes; at most " +
                     std::to_string(options.max_bytes) + " are accepted";
    return false;
  }
  if (options.fast_path && ReadPlainData(bytes, options, request)) return true;
  JsonScan scan;
  Parsed parsed = ParseJson(bytes, &scan);
  // The seq, when it was read and is not ambiguous, is echoed whatever goes wrong next.
  request->seq = scan.seq();
  const bool seq_read = request->seq.has_value();
  if (!parsed.ok) {
    *error = std::move(parsed.error);
    return false;
  }
  Decoder decoder(options, request, error);
  if (parsed.doc.is_object()) {
    const auto it = parsed.doc.find("seq");
    if (it == parsed.doc.end()) {
      return decoder.Fail(ErrorCode::kBadMessage, "seq", "missing (every request carries one)");
    }
    if (!scan.duplicate().empty()) {
      return decoder.Fail(ErrorCode::kBadMessage, Sanitized(scan.duplicate()), "duplicate field");
    }
    if (!seq_read) {
      return decoder.Fail(ErrorCode::kBadMessage, "seq",
                          "must be an integer in the 64-bit range (got " + Shown(*it) + ")");
    }
  }
  if (!decoder.DecodeMessage(parsed.doc)) {
    request->observations.clear();
    return false;
  }
  return true;
}

std::string EncodeOk(const std::optional<std::int64_t>& seq, const nlohmann::ordered_json& result) {
  json out = {{"seq", SeqJson(seq)}, {"ok", true}};
  if (!result.is_object()) {
    out["result"] = result;
    return Dump(out);
  }
  for (const auto& [key, value] : result.items()) {
    if (key != "seq" && key != "ok") out[key] = value;
  }
  return Dump(out);
}

std::string EncodeDataOk(const std::optional<std::int64_t>& seq, const DataCounts& counts) {
  std::string out = "{\"seq\":";
  out += seq ? std::to_string(*seq) : std::string("null");
  out += ",\"ok\":true,\"stored\":";
  out += std::to_string(counts.stored);
  out += ",\"duplicates\":";
  out += std::to_string(counts.duplicates);
  out += ",\"revisions\":";
  out += std::to_string(counts.revisions);
  out += ",\"late\":";
  out += std::to_string(counts.late);
  out += "}";
  return out;
}

std::string EncodeError(const std::optional<std::int64_t>& seq, const WireError& error) {
  const json out = {{"seq", SeqJson(seq)},
                    {"ok", false},
                    {"code", ErrorCodeName(error.code)},
                    {"message", error.message}};
  return Dump(out);
}

nlohmann::ordered_json AlertEventJson(const AlertEvent& event) {
  return json{{"model", event.model},
              {"period", event.period},
              {"row", event.row},
              {"monitor", event.monitor},
              {"transition", event.raised ? "raised" : "cleared"},
              {"level", AlertLevelName(event.level)},
              {"statistic", FiniteOrNull(event.statistic)},
              {"threshold", FiniteOrNull(event.threshold)},
              {"message", event.message}};
}

std::string EncodeRejectEvent(const WireError& error, std::int64_t count) {
  const json out = {
      {"code", ErrorCodeName(error.code)}, {"message", error.message}, {"count", count}};
  return Dump(out);
}

std::string EstimateTopic(const std::string& model) { return "est." + model; }
std::string AlertTopic(const std::string& model) { return "alert." + model; }

}  // namespace rimwatch::daemon
