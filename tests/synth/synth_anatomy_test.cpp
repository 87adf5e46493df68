// The anatomy phantoms are drawn inside their own skin: every bone lies within the soft-tissue
// envelope that the truth uses for the anatomy box (a bone outside the skin is impossible, and
// would put rendered anatomy outside the true box).
#include <doctest/doctest.h>

#include <random>
#include <string>

#include "beamtrim/synth.h"
#include "synth/phantom.h"

using namespace beamtrim;
using namespace beamtrim::synth_internal;

TEST_CASE("BonesLieInsideTheSoftTissueEnvelope") {
  // Fact of anatomy: every bone is covered by soft tissue (from memory; skin and subcutaneous
  // tissue are a few mm at the least, at the shin and the skull).
  // The trunk phantoms (chest, abdomen, pelvis) are truncated patients: their spine and ribs
  // run on past the ellipse that stands for the trunk, as the real trunk does past the image.
  // Extending their envelopes with straight-sided segments drew long straight "skin lines"
  // that no patient has, so they are left out here.
  for (SynthBodyPart part : {SynthBodyPart::kSkull, SynthBodyPart::kHand, SynthBodyPart::kKnee,
                             SynthBodyPart::kForearm, SynthBodyPart::kFoot}) {
    for (const std::string view : {"AP", "LL"}) {
      std::mt19937_64 rng(7);
      Phantom ph = BuildAnatomy(part, view, false, rng);
      for (Primitive& p : ph.parts) p.Finish();
      int outside = 0, sampled = 0;
      for (const Primitive& p : ph.parts) {
        if (p.material != Material::kBone || p.weight < 0.0) continue;
        for (double y = p.y0; y <= p.y1; y += 0.5) {
          for (double x = p.x0; x <= p.x1; x += 0.5) {
            // Well inside the bone (more than 1 mm of it along the ray), not a grazing edge.
            if (p.PathLength(x, y) <= 1.0) continue;
            ++sampled;
            if (ph.TissueThickness(x, y) <= 0.0) ++outside;
          }
        }
      }
      const std::string name = SynthBodyPartName(part);
      CAPTURE(name);
      CAPTURE(view);
      CHECK(sampled > 0);
      CAPTURE(sampled);
      CHECK(outside == 0);
    }
  }
}
