// Research aid for the look-alike confirmation (docs/lookalikes.md): says why two
// image files are or are not joined. For every flip/turn t of the first file it
// prints the hash distance to the second's plain code and, where the hash join
// would pair them (distance <= radius), each measurement of match_thumbnails
// against the pair's settings (the small-picture rule applied).
// Usage: pair_explain FILE_A FILE_B
#include <cmath>
#include <cstdio>
#include <stdexcept>

#include "support/planted.h"
#include "support/temp_tree.h"
#include "tamis/read/decode/decode.h"
#include "tamis/read/probe.h"
#include "tamis/relate/groups.h"
#include "tamis/relate/lookalike_index.h"
#include "tamis/relate/match.h"
#include "tamis/relate/screen_join.h"

using namespace tamis;

int main(int argc, char** argv) {
  if (argc < 3) {
    std::fprintf(stderr, "usage: pair_explain FILE_A FILE_B\n");
    return 2;
  }
  try {
    const auto bytes_a = test::read_bytes(argv[1]), bytes_b = test::read_bytes(argv[2]);
    const ProbeOutcome pa = probe_bytes(bytes_a), pb = probe_bytes(bytes_b);
    const Lookalike a = test::lookalike_of_bytes(bytes_a), b = test::lookalike_of_bytes(bytes_b);
    const GroupSettings gs;
    const PictureSize sa = picture_size(pa.info.width, pa.info.height), sb = picture_size(pb.info.width, pb.info.height);
    const MatchSettings ms = pair_settings(gs.match, sa, sb, 0);
    std::printf("a %ux%u  b %ux%u  pair threshold %.5f  radius %d\n", pa.info.width, pa.info.height, pb.info.width,
                pb.info.height, ms.min_correlation, gs.radius);
    {
      const MatchProfile qa = match_profile(a.thumb), qb = match_profile(b.thumb);
      const BlurCandidates bc = blur_candidates(qa, qb);
      std::printf("spectral mean a %.4f b %.4f, variance a %.4f b %.4f; blur steps tried on %s:", qa.lambda_mean, qb.lambda_mean,
                  qa.lambda_var, qb.lambda_var, bc.blur_a ? "a" : "b");
      for (int k = 0; k < bc.count; ++k) std::printf(" %d", bc.steps[k]);
      std::printf("\n");
    }
    const MatchProfile qa = match_profile(a.thumb), qb = match_profile(b.thumb);
    {
      double la = 0, lb = 0;
      for (int i = 0; i < kScreenCoefficients; ++i) {
        la += double(qa.low[size_t(i)]) * qa.low[size_t(i)];
        lb += double(qb.low[size_t(i)]) * qb.low[size_t(i)];
      }
      std::printf("screen block length a %.4f b %.4f\n", std::sqrt(la) / 32767, std::sqrt(lb) / 32767);
    }
    for (int t = 0; t < kDihedralCount; ++t) {
      const int d = hamming(a.phash[t], b.phash[0]);
      const Match m = match_thumbnails(a.thumb, t, b.thumb, pair_settings(gs.match, sa, sb, t));
      std::printf("t%d screen %.4f dist %2d%s corr %.5f (blur %d on %s, fitted %d) local %.4f chroma %.3f chroma_local %.3f -> %s\n",
                  t, std::sqrt(double(screen_distance2(qa, t, qb))) / 32767.0, d, d <= gs.radius ? " " : "*", m.correlation, m.blur_step, m.blurred_a ? "a" : "b", int(m.fitted),
                  m.local, m.chroma, m.chroma_local, m.joined && d <= gs.radius ? "JOINED" : "no");
    }
  } catch (const std::exception& e) {
    std::fprintf(stderr, "pair_explain: %s\n", e.what());
    return 1;
  }
  return 0;
}
