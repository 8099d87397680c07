// The single-pass reader of plain data requests (wire.h, ReadPlainData).
//
// Invariant: when it returns true, *request is exactly what the general decoder (DecodeRequest
// with fast_path = false) makes of the same bytes, and the general decoder accepts them. It
// declines (returns false, nothing promised about *request) on anything outside the plain subset
// below, and the general decoder then gives the verdict and the error message, so the two paths
// cannot differ in what they accept or in any error text. Checked by wire_test
// (WireFastPathTest) on the corpus, its mutants and random messages.
//
// The plain subset: an obs, row or batch request, one JSON object with only the fields of its
// type, each once; strings of printable ASCII without escapes; numbers in JSON syntax, integers
// of at most 18 digits (a longer one is declined rather than rounded here), other numbers read
// with std::from_chars (correctly rounded, as is strtod, which the general parser uses); a row's
// values object of at most kMaxRowKeys series. Everything is parsed in place: no document, no
// per-object set, no allocation beyond the Observations themselves.
#include <charconv>
#include <cmath>
#include <cstdint>
#include <string_view>
#include <system_error>

#include "field_rules.h"
#include "rimwatch/daemon/wire.h"

namespace rimwatch::daemon {
namespace {

constexpr std::size_t kMaxRowKeys = 64;  // more series in one row: the general decoder
constexpr int kMaxIntegerDigits = 18;    // always inside int64; longer: the general decoder

// One scalar as read: the raw text of a string (no escapes), an integer, or another number.
struct Scalar {
  enum class Kind { kNone, kString, kInteger, kNumber };
  Kind kind = Kind::kNone;
  std::string_view text;  // kString: the contents between the quotes
  std::int64_t integer = 0;
  double number = 0.0;  // kInteger and kNumber: the value as a double
};

// Fields of data requests and items, one bit each (a repeat is a duplicate key: declined).
enum Field : unsigned {
  kType = 1u << 0,
  kSeq = 1u << 1,
  kSeries = 1u << 2,
  kPeriod = 1u << 3,
  kValue = 1u << 4,
  kReleasedAt = 1u << 5,
  kValues = 1u << 6,
  kItems = 1u << 7,
};

Field FieldOf(std::string_view key) {
  if (key == "type") return kType;
  if (key == "seq") return kSeq;
  if (key == "series") return kSeries;
  if (key == "period") return kPeriod;
  if (key == "value") return kValue;
  if (key == "released_at") return kReleasedAt;
  if (key == "values") return kValues;
  if (key == "items") return kItems;
  return static_cast<Field>(0);
}

class Reader {
 public:
  Reader(std::string_view bytes, const DecodeOptions& options, Request* request)
      : p_(bytes.data()), end_(bytes.data() + bytes.size()), options_(options), request_(request) {}

  bool ReadMessage() {
    *request_ = Request{};
    Skip();
    if (!Eat('{')) return false;
    unsigned seen = 0;
    Scalar type, seq;
    Item item;  // the fields of an obs / row at the top level
    std::size_t items_first = 0;
    bool has_items = false;
    Skip();
    if (Eat('}')) return false;  // no type
    do {
      Skip();
      std::string_view key;
      if (!String(&key)) return false;
      const Field f = FieldOf(key);
      if (f == 0 || (seen & f)) return false;
      seen |= f;
      Skip();
      if (!Eat(':')) return false;
      Skip();
      bool ok = false;
      switch (f) {
        case kType:
          ok = ReadScalar(&type);
          break;
        case kSeq:
          ok = ReadScalar(&seq);
          break;
        case kItems:
          items_first = request_->observations.size();
          has_items = true;
          ok = ReadItems();
          break;
        default:
          ok = ItemField(f, &item);
          break;
      }
      if (!ok) return false;
      Skip();
    } while (Eat(','));
    if (!Eat('}')) return false;
    Skip();
    if (p_ != end_) return false;

    if (seq.kind != Scalar::Kind::kInteger || type.kind != Scalar::Kind::kString) return false;
    request_->seq = seq.integer;
    const unsigned item_fields = seen & ~(kType | kSeq);
    if (type.text == "batch") {
      request_->type = RequestType::kBatch;
      return item_fields == kItems && has_items && items_first == 0;
    }
    if (type.text == "obs") {
      request_->type = RequestType::kObs;
      return (item_fields & ~(kSeries | kPeriod | kValue | kReleasedAt)) == 0 &&
             FinishObs(item_fields, item);
    }
    if (type.text == "row") {
      request_->type = RequestType::kRow;
      return (item_fields & ~(kPeriod | kValues | kReleasedAt)) == 0 &&
             FinishRow(item_fields, item);
    }
    return false;
  }

 private:
  // The fields of one obs or row, top-level or a batch item. A row's values go straight into
  // request_->observations (from values_first on); period and release time are filled in by
  // FinishRow once the whole object is read.
  struct Item {
    Scalar series, period, value, released_at;
    std::size_t values_first = 0;
    std::size_t values_count = 0;
  };

  bool ItemField(Field f, Item* item) {
    switch (f) {
      case kSeries:
        return ReadScalar(&item->series);
      case kPeriod:
        return ReadScalar(&item->period);
      case kValue:
        return ReadScalar(&item->value);
      case kReleasedAt:
        return ReadScalar(&item->released_at);
      case kValues:
        return ReadValues(item);
      default:
        return false;
    }
  }

  // "items": [ {obs or row}, ... ]
  bool ReadItems() {
    if (!Eat('[')) return false;
    Skip();
    if (Eat(']')) return false;  // empty: refused by the general decoder
    std::size_t count = 0;
    do {
      Skip();
      if (++count > options_.max_batch_items) return false;
      if (!ReadItem()) return false;
      Skip();
    } while (Eat(','));
    return Eat(']');
  }

  bool ReadItem() {
    if (!Eat('{')) return false;
    unsigned seen = 0;
    Item item;
    Skip();
    if (Eat('}')) return false;
    do {
      Skip();
      std::string_view key;
      if (!String(&key)) return false;
      const Field f = FieldOf(key);
      if ((f & (kSeries | kPeriod | kValue | kReleasedAt | kValues)) == 0 || (seen & f)) {
        return false;
      }
      seen |= f;
      Skip();
      if (!Eat(':')) return false;
      Skip();
      if (!ItemField(f, &item)) return false;
      Skip();
    } while (Eat(','));
    if (!Eat('}')) return false;
    if (seen & kValues) {
      return (seen & ~(kPeriod | kValues | kReleasedAt)) == 0 && FinishRow(seen, item);
    }
    return FinishObs(seen, item);
  }

  // "values": {"series": number, ...}, appended to request_->observations (period later).
  bool ReadValues(Item* item) {
    if (!Eat('{')) return false;
    item->values_first = request_->observations.size();
    Skip();
    if (Eat('}')) return false;  // empty: refused by the general decoder
    do {
      Skip();
      std::string_view name;
      if (!String(&name)) return false;
      if (!wire_rules::IsName(name, wire_rules::kMaxSeriesName, /*allow_colon=*/true)) return false;
      if (++item->values_count > kMaxRowKeys) return false;
      for (std::size_t i = item->values_first; i < request_->observations.size(); ++i) {
        if (request_->observations[i].series == name) return false;  // duplicate key
      }
      Skip();
      if (!Eat(':')) return false;
      Skip();
      Scalar value;
      if (!ReadScalar(&value) || !IsNumber(value)) return false;
      Observation& obs = request_->observations.emplace_back();
      obs.series.assign(name);
      obs.value = value.number;
      Skip();
    } while (Eat(','));
    return Eat('}');
  }

  bool FinishObs(unsigned seen, const Item& item) {
    if ((seen & (kSeries | kPeriod | kValue)) != (kSeries | kPeriod | kValue)) return false;
    if (item.series.kind != Scalar::Kind::kString ||
        !wire_rules::IsName(item.series.text, wire_rules::kMaxSeriesName, /*allow_colon=*/true) ||
        !IsNumber(item.value)) {
      return false;
    }
    Observation obs;
    if (!PeriodOf(item.period, &obs.period)) return false;
    if ((seen & kReleasedAt) && !ReleaseOf(item.released_at, &obs.released_at)) return false;
    obs.series.assign(item.series.text);
    obs.value = item.value.number;
    request_->observations.push_back(std::move(obs));
    return true;
  }

  bool FinishRow(unsigned seen, const Item& item) {
    if ((seen & (kPeriod | kValues)) != (kPeriod | kValues)) return false;
    Period period;
    std::string released_at;
    if (!PeriodOf(item.period, &period)) return false;
    if ((seen & kReleasedAt) && !ReleaseOf(item.released_at, &released_at)) return false;
    for (std::size_t i = item.values_first; i < item.values_first + item.values_count; ++i) {
      Observation& obs = request_->observations[i];
      obs.period = period;
      obs.released_at = released_at;
    }
    return true;
  }

  static bool IsNumber(const Scalar& s) {
    return s.kind == Scalar::Kind::kInteger || s.kind == Scalar::Kind::kNumber;
  }

  static bool PeriodOf(const Scalar& s, Period* out) {
    if (s.kind == Scalar::Kind::kInteger) {
      *out = IntegerPeriod(s.integer);
      return true;
    }
    if (s.kind != Scalar::Kind::kString || wire_rules::LooksLikeInteger(s.text)) return false;
    return ParsePeriod(s.text, out).ok();
  }

  static bool ReleaseOf(const Scalar& s, std::string* out) {
    if (s.kind != Scalar::Kind::kString) return false;
    Period p;
    if (!ParsePeriod(s.text, &p).ok() || p.kind != PeriodKind::kTimestamp) return false;
    out->assign(s.text);
    return true;
  }

  // A string or a number; anything else (objects, arrays, true, false, null) is declined.
  bool ReadScalar(Scalar* out) {
    if (p_ == end_) return false;
    if (*p_ == '"') {
      out->kind = Scalar::Kind::kString;
      return String(&out->text);
    }
    return NumberToken(out);
  }

  // A string of printable ASCII without escapes; its contents in *out.
  bool String(std::string_view* out) {
    if (!Eat('"')) return false;
    const char* start = p_;
    while (p_ != end_) {
      const auto c = static_cast<unsigned char>(*p_);
      if (c == '"') {
        *out = std::string_view(start, static_cast<std::size_t>(p_ - start));
        ++p_;
        return true;
      }
      if (c < 0x20 || c >= 0x7F || c == '\\') return false;
      ++p_;
    }
    return false;
  }

  // JSON number syntax: -?(0|[1-9][0-9]*)(\.[0-9]+)?([eE][+-]?[0-9]+)?
  bool NumberToken(Scalar* out) {
    const char* start = p_;
    const char* q = p_;
    if (q != end_ && *q == '-') ++q;
    const char* int_start = q;
    if (q == end_ || !IsDigit(*q)) return false;
    if (*q == '0') {
      ++q;
    } else {
      while (q != end_ && IsDigit(*q)) ++q;
    }
    const auto int_digits = q - int_start;
    bool is_integer = true;
    if (q != end_ && *q == '.') {
      ++q;
      if (q == end_ || !IsDigit(*q)) return false;
      while (q != end_ && IsDigit(*q)) ++q;
      is_integer = false;
    }
    if (q != end_ && (*q == 'e' || *q == 'E')) {
      ++q;
      if (q != end_ && (*q == '+' || *q == '-')) ++q;
      if (q == end_ || !IsDigit(*q)) return false;
      while (q != end_ && IsDigit(*q)) ++q;
      is_integer = false;
    }
    p_ = q;
    if (is_integer) {
      if (int_digits > kMaxIntegerDigits) return false;
      std::int64_t v = 0;
      for (const char* d = int_start; d != q; ++d) v = v * 10 + (*d - '0');
      out->kind = Scalar::Kind::kInteger;
      out->integer = *start == '-' ? -v : v;
      out->number = static_cast<double>(out->integer);
      return true;
    }
    double x = 0.0;
    const auto [ptr, ec] = std::from_chars(start, q, x, std::chars_format::general);
    if (ec != std::errc() || ptr != q || !std::isfinite(x)) return false;
    out->kind = Scalar::Kind::kNumber;
    out->number = x;
    return true;
  }

  static bool IsDigit(char c) { return c >= '0' && c <= '9'; }

  void Skip() {
    while (p_ != end_ && (*p_ == ' ' || *p_ == '\t' || *p_ == '\n' || *p_ == '\r')) ++p_;
  }
  bool Eat(char c) {
    if (p_ == end_ || *p_ != c) return false;
    ++p_;
    return true;
  }

  const char* p_;
  const char* end_;
  const DecodeOptions& options_;
  Request* request_;
};

}  // namespace

bool ReadPlainData(std::string_view bytes, const DecodeOptions& options, Request* request) {
  if (bytes.size() > options.max_bytes) return false;
  Reader reader(bytes, options, request);
  if (reader.ReadMessage()) return true;
  *request = Request{};
  return false;
}

}  // namespace rimwatch::daemon
