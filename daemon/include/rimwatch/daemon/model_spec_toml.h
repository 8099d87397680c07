// The TOML text form of a ModelSpec (schemas/model.example.toml documents every key).
//
// Unknown keys, wrong types and impossible values are refused with "SOURCE:LINE: key = value:
// rule", so a spec added over the wire and one loaded from disk get the same messages.
// Thread safety: the function is reentrant.
#pragma once

#include <string>
#include <string_view>

#include "rimwatch/engine/model_spec.h"
#include "rimwatch/engine/status.h"

namespace rimwatch {

// Parse and validate (ModelSpec::IsValid). `source` names the text in messages (a file path, or
// "model.add"). On error *out is unspecified.
Status ParseModelSpecToml(std::string_view text, std::string_view source, ModelSpec* out);

}  // namespace rimwatch
