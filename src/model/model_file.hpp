// Reading a model description (YAML, our own format; README "Model
// descriptions") into a Model. Only this file knows about YAML.
#pragma once

#include "model.hpp"

#include <string>
#include <utility>
#include <vector>

namespace longrun::model {

// name=value pairs from --set; a value may be a number or an expression over
// the model's parameters.
using Overrides = std::vector<std::pair<std::string, std::string>>;

// Throws InputError (exit 2) naming the file and line for anything wrong in the
// description, UsageError (exit 1) for an override naming no parameter.
Model read_model_file(const std::string& path, const Overrides& overrides = {});
Model parse_model(const std::string& yaml_text, const std::string& file_name,
                  const Overrides& overrides = {});

} // namespace longrun::model
