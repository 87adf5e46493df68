// The shipped default rules. This text must equal rules/default-rules.json byte for byte
// (tests/analysis/rules_test.cpp checks it), so the file users copy and edit is exactly what
// runs when no rules file is given.
#include <string_view>

#include "beamtrim/rules.h"

namespace beamtrim {

std::string_view DefaultRulesJson() {
  static constexpr std::string_view kText = R"json(
{
  "schema": "beamtrim.rules",
  "version": 1,
  "source": "common practice, no single source; adapt to local protocols",
  "default": {
    "name": "default",
    "margin_mm": 10,
    "max_excess_fraction": 0.30,
    "require_all_borders": true,
    "clipped_sides_allowed": 2,
    "note": "any exam without a rule of its own; a limb may run through two blade edges"
  },
  "rules": [
    {
      "name": "hand and wrist",
      "body_parts": ["HAND", "FINGER", "WRIST"],
      "margin_mm": 5,
      "max_excess_fraction": 0.25,
      "clipped_sides_allowed": 1,
      "note": "the forearm may run through one blade edge; fingers must not be cut off"
    },
    {
      "name": "foot and ankle",
      "body_parts": ["FOOT", "TOE", "ANKLE", "HEEL"],
      "margin_mm": 5,
      "max_excess_fraction": 0.25,
      "clipped_sides_allowed": 1,
      "note": "the leg may run through one blade edge; toes must not be cut off"
    },
    {
      "name": "limb",
      "body_parts": ["ELBOW", "FOREARM", "ARM", "KNEE", "LEG", "THIGH", "EXTREMITY"],
      "margin_mm": 10,
      "max_excess_fraction": 0.30,
      "clipped_sides_allowed": 2
    },
    {
      "name": "shoulder and hip",
      "body_parts": ["SHOULDER", "CLAVICLE", "HIP"],
      "margin_mm": 10,
      "max_excess_fraction": 0.30,
      "clipped_sides_allowed": 3
    },
    {
      "name": "chest lateral",
      "body_parts": ["CHEST"],
      "views": ["LL", "RL", "LATERAL", "LAT"],
      "margin_mm": 10,
      "max_excess_fraction": 0.30,
      "clipped_sides_allowed": 4
    },
    {
      "name": "chest",
      "body_parts": ["CHEST"],
      "margin_mm": 10,
      "max_excess_fraction": 0.25,
      "clipped_sides_allowed": 4,
      "note": "the trunk is usually wider than the field; the lungs cannot be told from the rest"
    },
    {
      "name": "trunk",
      "body_parts": ["ABDOMEN", "PELVIS", "SPINE", "CSPINE", "TSPINE", "LSPINE", "SSPINE"],
      "margin_mm": 10,
      "max_excess_fraction": 0.30,
      "clipped_sides_allowed": 4
    },
    {
      "name": "skull",
      "body_parts": ["SKULL", "HEAD"],
      "margin_mm": 10,
      "max_excess_fraction": 0.30,
      "clipped_sides_allowed": 1,
      "note": "the neck may run through one blade edge"
    }
  ]
}
)json";
  return kText.substr(1);  // drop the newline after the raw-string opener
}

}  // namespace beamtrim
