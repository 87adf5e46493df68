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
    "clipped_sides_allowed": 0,
    "continues_through": "both ends",
    "note": "any exam without a rule of its own: a limb or the trunk may run through the two blade edges across its long axis; anatomy at the other edges is a likely cut-off"
  },
  "rules": [
    {
      "name": "hand and wrist",
      "body_parts": ["HAND", "FINGER", "WRIST"],
      "margin_mm": 5,
      "max_excess_fraction": 0.25,
      "continues_through": "one end",
      "note": "the forearm runs through one end; fingers and the sides of the hand must not be cut off"
    },
    {
      "name": "foot",
      "body_parts": ["FOOT", "TOE", "HEEL"],
      "margin_mm": 5,
      "max_excess_fraction": 0.25,
      "continues_through": "none",
      "note": "the whole foot, toes to heel, belongs inside the field; the leg lies over the hindfoot, not beyond a blade"
    },
    {
      "name": "ankle",
      "body_parts": ["ANKLE"],
      "margin_mm": 5,
      "max_excess_fraction": 0.25,
      "continues_through": "one end",
      "note": "the leg runs through one end; the heel and the sides must not be cut off"
    },
    {
      "name": "limb",
      "body_parts": ["ELBOW", "FOREARM", "ARM", "KNEE", "LEG", "THIGH", "EXTREMITY"],
      "margin_mm": 10,
      "max_excess_fraction": 0.30,
      "continues_through": "both ends",
      "note": "the limb runs through both ends; its sides must not be cut off"
    },
    {
      "name": "shoulder and hip",
      "body_parts": ["SHOULDER", "CLAVICLE", "HIP"],
      "margin_mm": 10,
      "max_excess_fraction": 0.30,
      "continues_through": "all sides",
      "note": "the trunk and the limb both leave the field; cut-off cannot be judged from the body outline"
    },
    {
      "name": "chest lateral",
      "body_parts": ["CHEST"],
      "views": ["LL", "RL", "LATERAL", "LAT"],
      "margin_mm": 10,
      "max_excess_fraction": 0.30,
      "continues_through": "all sides"
    },
    {
      "name": "chest",
      "body_parts": ["CHEST"],
      "margin_mm": 10,
      "max_excess_fraction": 0.25,
      "continues_through": "all sides",
      "note": "the trunk is usually wider than the field; the lungs cannot be told from the rest"
    },
    {
      "name": "trunk",
      "body_parts": ["ABDOMEN", "PELVIS", "SPINE", "CSPINE", "TSPINE", "LSPINE", "SSPINE"],
      "margin_mm": 10,
      "max_excess_fraction": 0.30,
      "continues_through": "all sides",
      "note": "the field normally lies within the body; cut-off of the organs cannot be judged from the body outline"
    },
    {
      "name": "skull",
      "body_parts": ["SKULL", "HEAD"],
      "margin_mm": 10,
      "max_excess_fraction": 0.30,
      "continues_through": "one end",
      "note": "the neck runs through one end; the vault and the sides must not be cut off"
    }
  ]
}
)json";
  return kText.substr(1);  // drop the newline after the raw-string opener
}

}  // namespace beamtrim
