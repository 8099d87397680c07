// Wire codec: JSON messages between feeders / the CLI and rimwatchd (schemas/wire/*.json,
// JSON Schema draft 2020-12). Decoding validates everything a message can get wrong on its own
// (JSON syntax, size, types, required fields, finite values, period syntax); what needs the
// daemon's state (unknown series or model, a period of the wrong kind for a series) is checked by
// the server with the same error codes.
//
// Requests (one JSON object per ZeroMQ message; "seq" is the sender's integer, echoed back):
//   {"type":"obs","seq":1,"series":"a","period":17|"2026-03-31"|"2026-03-31T14:30:00Z",
//    "value":1.5,"released_at":"2026-04-02T08:30:00Z"?}
//   {"type":"row","seq":2,"period":..,"values":{"a":1.5,"b":-0.2},"released_at":..?}
//   {"type":"batch","seq":3,"items":[<obs or row without type/seq>, ...]}   (refused whole if
//    any item is bad; the message names the first bad item: "items[3].value: ...")
//   {"type":"model.add","seq":4,"spec":"<TOML text>"}   {"type":"model.drop","seq":5,"model":"m"}
//   {"type":"model.list","seq":6}   {"type":"state","seq":7,"model":"m"} {"type":"health","seq":8}
// Field rules (every error message starts with the field path: "items[3].values.b: ..."):
//   seq       required, a JSON integer in the int64 range (1.0 is refused)        bad_message
//   fields    only those shown; a duplicate key anywhere is refused               bad_message
//   series    1..128 characters of [A-Za-z0-9_.:-] (also the keys of "values")   bad_message
//   value(s)  JSON numbers; outside the double range (1e999)                      non_finite
//   period    a JSON integer (int64), or a string ParsePeriod reads as a date or timestamp;
//             a string of digits ("17") and a non-integer number are refused      bad_period
//   released_at  optional, a timestamp string (ParsePeriod, kind timestamp)       bad_period
//   values    a non-empty object; items: a non-empty list of at most
//             DecodeOptions::max_batch_items (else too_large); an item holding "values" is a
//             row item, any other an obs item
//   spec      a non-empty string; model: 1..64 characters of [A-Za-z0-9_.-]       bad_message
// Replies: {"seq":1,"ok":true,...result} or {"seq":1,"ok":false,"code":"<code>","message":".."}.
// A message whose seq cannot be read gets "seq":null (the seq is read as soon as the parser
// passes it, so a message that breaks after it still echoes it; a duplicated seq is not read).
// Events (PUB; first frame the topic, second the JSON):
//   est.<model>    RowPayload (record.h) plus "model"
//   alert.<model>  {"model","period","row","monitor","transition","level","statistic",
//                   "threshold","message"}   (statistic / threshold null when not finite)
//   reject         {"code","message","count"} summaries of refused input
//
// Thread safety: pure functions.
#pragma once

#include <cstddef>
#include <cstdint>
#include <nlohmann/json.hpp>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "rimwatch/daemon/period.h"
#include "rimwatch/engine/alert.h"

namespace rimwatch::daemon {

// Stable error codes of replies (and of health's reject counts).
enum class ErrorCode {
  kBadJson,        // "bad_json": not parseable JSON, or not an object
  kBadMessage,     // "bad_message": missing field, wrong type, unexpected field
  kUnknownType,    // "unknown_type": "type" is not one of the request types
  kNonFinite,      // "non_finite": a value is NaN / Inf (or a number outside double range)
  kBadPeriod,      // "bad_period": a period that is not an integer, date or timestamp
  kPeriodKind,     // "period_kind": a period of another kind than the series already holds
  kTooLarge,       // "too_large": message over the size limit
  kUnknownSeries,  // "unknown_series": no active model uses the series
  kUnknownModel,   // "unknown_model"
  kBadSpec,        // "bad_spec": model.add with an invalid spec (message from the spec reader)
  kModelExists,    // "model_exists"
  kStorage,        // "storage": the store failed; nothing of the request was kept
  kInternal,       // "internal"
};
inline constexpr int kErrorCodeCount = 13;
std::string_view ErrorCodeName(ErrorCode code);
// Inverse of ErrorCodeName; false for any other text.
bool ErrorCodeFromName(std::string_view name, ErrorCode* out);

struct WireError {
  ErrorCode code = ErrorCode::kInternal;
  std::string message;  // names the field: "items[2].value: must be a finite number"
};

enum class RequestType { kObs, kRow, kBatch, kModelAdd, kModelDrop, kModelList, kState, kHealth };
std::string_view RequestTypeName(RequestType type);  // "obs", "row", ..., "model.add", ...

// One value for one (series, period). Rows and batches are flattened into these, in order.
struct Observation {
  std::string series;
  Period period;
  double value = 0.0;
  std::string released_at;  // as sent (ISO 8601 text), or empty
};

struct Request {
  RequestType type = RequestType::kHealth;
  std::optional<std::int64_t> seq;
  std::vector<Observation> observations;  // obs, row, batch
  std::string spec_text;                  // model.add
  std::string model;                      // model.drop, state
};

struct DecodeOptions {
  std::size_t max_bytes = 1 << 20;       // messages above this are refused (too_large) unparsed
  std::size_t max_batch_items = 100000;  // a batch with more items is refused (too_large)
  // Try ReadPlainData first (the daemon's hot path); false: the general decoder only (tests
  // compare the two).
  bool fast_path = true;
};

// Decodes and validates one request. On failure *error is set, and request->seq holds the seq if
// it could be read (so the reply can echo it).
bool DecodeRequest(std::string_view bytes, const DecodeOptions& options, Request* request,
                   WireError* error);

// The single-pass reader of plain data requests (src/wire/data_reader.cc): obs, row and batch
// messages with only their own fields, strings of printable ASCII without escapes, integers of at
// most 18 digits and rows of at most 64 series, read without building a document. True: *request
// is exactly what the general decoder makes of the bytes, and it would accept them. False: it
// declines (anything else, valid or not; *request is reset) and DecodeRequest's general decoder
// decides, so verdicts and error messages never depend on which reader ran.
bool ReadPlainData(std::string_view bytes, const DecodeOptions& options, Request* request);

// Replies. The members of `result` follow "seq" and "ok" in the reply object; REQUIRES: result
// is an object without the keys "seq" and "ok" (such keys are dropped; a non-object result is
// sent as "result").
std::string EncodeOk(const std::optional<std::int64_t>& seq,
                     const nlohmann::ordered_json& result = nlohmann::ordered_json::object());
std::string EncodeError(const std::optional<std::int64_t>& seq, const WireError& error);

// What a data request did to the store (the data reply's members).
struct DataCounts {
  std::int64_t stored = 0;  // new values, revisions and late values
  std::int64_t duplicates = 0;
  std::int64_t revisions = 0;
  std::int64_t late = 0;
};
// The data reply: the same text as EncodeOk(seq, {"stored":..,"duplicates":..,"revisions":..,
// "late":..}), written directly (one per data request, on the daemon's hot path).
std::string EncodeDataOk(const std::optional<std::int64_t>& seq, const DataCounts& counts);

// Event bodies.
nlohmann::ordered_json AlertEventJson(const AlertEvent& event);
std::string EncodeRejectEvent(const WireError& error, std::int64_t count);

// Topics.
std::string EstimateTopic(const std::string& model);  // "est.<model>"
std::string AlertTopic(const std::string& model);     // "alert.<model>"
inline constexpr const char* kRejectTopic = "reject";

}  // namespace rimwatch::daemon
