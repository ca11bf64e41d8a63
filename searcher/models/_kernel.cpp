// One-pass CPU kernels for e3nn's weighted ``uvw`` / ``uvu`` tensor products.
//
// Longer than our 400-line habit on purpose: torch builds one extension from one source
// here, and the per-row loops, the GEMM blocks and the gathered pass share its tables and
// helpers.
//
// A product is described by tables (built in searcher/models/_compiled.py, one set per
// product structure), so this file compiles once per machine for every structure:
//
//   paths [P, 13] int64: s1 mul1 d1  s2 mul2 d2  so mulo d3  woff mode nz0 nnz
//     (x1/x2/out block start, multiplicity, 2l+1; flat weight offset; mode 0 = uvw,
//      1 = uvu; the path's non-zero Wigner 3j entries nz0 .. nz0 + nnz)
//   alpha [P]: path weights;  nzi [NNZ, 3] int64 (i, j, k);  nzc [NNZ]: 3j values.
//
// For each edge and path, t[k] = sum_{ijk} C_ijk x1[u, i] x2[v, j] is formed in registers
// (through M[i][k] = sum_j C_ijk x2[v, j], one small dense matrix per path and v) and
// multiplied into the output straight away: no (edges x path rows x (2l+1)) intermediate is
// written.  uvw accumulates a k-major tile acc[k][w] (contiguous in w, so
// the weight loop vectorises) and writes it out once per path.  The backward recomputes t.
#include <torch/extension.h>

#include <algorithm>
#include <vector>

namespace {

constexpr int kMaxDim = 15;  // 2l+1 for l <= 7

struct Path {
  int64_t s1, mul1, d1, s2, mul2, d2, so, mulo, d3, woff, mode, nz0, nnz;
};

std::vector<Path> read_paths(const torch::Tensor& paths) {
  TORCH_CHECK(paths.dtype() == torch::kInt64 && paths.dim() == 2 && paths.size(1) == 13,
              "paths must be int64 [P, 13]");
  auto p = paths.contiguous();
  const int64_t* d = p.data_ptr<int64_t>();
  std::vector<Path> out(p.size(0));
  for (int64_t r = 0; r < p.size(0); ++r) {
    const int64_t* q = d + 13 * r;
    out[r] = Path{q[0], q[1], q[2], q[3], q[4], q[5], q[6], q[7], q[8], q[9], q[10], q[11],
                  q[12]};
    TORCH_CHECK(out[r].d3 <= kMaxDim, "output order above l = 7");
  }
  return out;
}

// M[i][k] = sum_j C_ijk x2[v, j]: the path's coupling applied to one x2 row (the only
// sparse step, once per path and v); every step per u below is dense and small.
template <typename T>
inline void bind(const Path& p, const int64_t* nzi, const T* nzc, const T* bv, T* mik) {
  for (int64_t n = 0; n < p.d1 * p.d3; ++n) mik[n] = T(0);
  for (int64_t n = p.nz0; n < p.nz0 + p.nnz; ++n) {
    const int64_t* e = nzi + 3 * n;
    mik[e[0] * p.d3 + e[2]] += nzc[n] * bv[e[1]];
  }
}

// t[k] = sum_i x1[u, i] M[i][k], with the orders known at compile time.
template <typename T, int D1, int D3>
inline void apply_m(const T* au, const T* mik, T* t) {
  for (int k = 0; k < D3; ++k) t[k] = T(0);
  for (int i = 0; i < D1; ++i) {
    const T a = au[i];
    for (int k = 0; k < D3; ++k) t[k] += a * mik[i * D3 + k];
  }
}

template <typename T>
inline void apply_m_any(int64_t d1, int64_t d3, const T* au, const T* mik, T* t) {
  for (int64_t k = 0; k < d3; ++k) t[k] = T(0);
  for (int64_t i = 0; i < d1; ++i)
    for (int64_t k = 0; k < d3; ++k) t[k] += au[i] * mik[i * d3 + k];
}

// The transposed steps of the backward: ga[i] += sum_k M[i][k] gt[k]; P[i][k] += a[i] gt[k].
template <typename T, int D1, int D3>
inline void back_m(const T* au, const T* mik, const T* gt, T* gau, T* pik) {
  for (int i = 0; i < D1; ++i) {
    T s = T(0);
    for (int k = 0; k < D3; ++k) s += mik[i * D3 + k] * gt[k];
    if (gau) gau[i] += s;
    if (pik)
      for (int k = 0; k < D3; ++k) pik[i * D3 + k] += au[i] * gt[k];
  }
}

template <typename T>
inline void back_m_any(int64_t d1, int64_t d3, const T* au, const T* mik, const T* gt, T* gau,
                       T* pik) {
  for (int64_t i = 0; i < d1; ++i) {
    T s = T(0);
    for (int64_t k = 0; k < d3; ++k) s += mik[i * d3 + k] * gt[k];
    if (gau) gau[i] += s;
    if (pik)
      for (int64_t k = 0; k < d3; ++k) pik[i * d3 + k] += au[i] * gt[k];
  }
}

#define SEARCHER_ORDERS(D1, D3, CALL, ANY)             \
  switch ((D1) * 16 + (D3)) {                          \
    case 1 * 16 + 1: CALL(1, 1); break;                \
    case 1 * 16 + 3: CALL(1, 3); break;                \
    case 1 * 16 + 5: CALL(1, 5); break;                \
    case 1 * 16 + 7: CALL(1, 7); break;                \
    case 3 * 16 + 1: CALL(3, 1); break;                \
    case 3 * 16 + 3: CALL(3, 3); break;                \
    case 3 * 16 + 5: CALL(3, 5); break;                \
    case 3 * 16 + 7: CALL(3, 7); break;                \
    case 5 * 16 + 1: CALL(5, 1); break;                \
    case 5 * 16 + 3: CALL(5, 3); break;                \
    case 5 * 16 + 5: CALL(5, 5); break;                \
    case 5 * 16 + 7: CALL(5, 7); break;                \
    case 7 * 16 + 1: CALL(7, 1); break;                \
    case 7 * 16 + 3: CALL(7, 3); break;                \
    case 7 * 16 + 5: CALL(7, 5); break;                \
    case 7 * 16 + 7: CALL(7, 7); break;                \
    default: ANY; break;                               \
  }

template <typename T>
inline void couple(const Path& p, const T* au, const T* mik, T* t) {
#define SEARCHER_FWD(A, B) apply_m<T, A, B>(au, mik, t)
  SEARCHER_ORDERS(p.d1, p.d3, SEARCHER_FWD, apply_m_any(p.d1, p.d3, au, mik, t))
#undef SEARCHER_FWD
}

template <typename T>
inline void uncouple(const Path& p, const T* au, const T* mik, const T* gt, T* gau, T* pik) {
#define SEARCHER_BWD(A, B) back_m<T, A, B>(au, mik, gt, gau, pik)
  SEARCHER_ORDERS(p.d1, p.d3, SEARCHER_BWD, back_m_any(p.d1, p.d3, au, mik, gt, gau, pik))
#undef SEARCHER_BWD
}

int64_t tile_size(const std::vector<Path>& paths) {
  int64_t tile = 1;
  for (const Path& p : paths) tile = std::max({tile, p.d3 * p.mulo, p.d1 * p.d3});
  return tile;
}

template <typename T>
void forward_impl(const std::vector<Path>& paths, const std::vector<char>& direct,
                  const T* alpha, const int64_t* nzi,
                  const T* nzc, const T* x1, const T* x2, const T* w, bool shared, int64_t z_n,
                  int64_t d1n, int64_t d2n, int64_t don, int64_t wn, T* out,
                  const int64_t* src = nullptr, const int64_t* dst = nullptr) {
  const int64_t tile = tile_size(paths);
  std::vector<T> acc(tile), mik(tile);
  T t[kMaxDim];
  for (int64_t z = 0; z < z_n; ++z) {
    const T* a = x1 + (src ? src[z] : z) * d1n;
    const T* b = x2 + z * d2n;
    const T* wz = shared ? w : w + z * wn;
    T* o = out + (dst ? dst[z] : z) * don;
    for (size_t q = 0; q < paths.size(); ++q) {
      if (!direct[q]) continue;
      const Path& p = paths[q];
      const T al = alpha[q];
      const int64_t m = p.mulo;
      if (p.mode == 0) std::fill(acc.begin(), acc.begin() + p.d3 * m, T(0));
      for (int64_t v = 0; v < p.mul2; ++v) {
        bind(p, nzi, nzc, b + p.s2 + v * p.d2, mik.data());
        for (int64_t u = 0; u < p.mul1; ++u) {
          couple(p, a + p.s1 + u * p.d1, mik.data(), t);
          if (p.mode == 0) {
            const T* wp = wz + p.woff + (u * p.mul2 + v) * m;
            for (int64_t k = 0; k < p.d3; ++k) {
              const T tk = al * t[k];
              T* ak = acc.data() + k * m;
              for (int64_t c = 0; c < m; ++c) ak[c] += wp[c] * tk;
            }
          } else {
            T* ob = o + p.so + u * p.d3;
            const T wt = al * wz[p.woff + u * p.mul2 + v];
            for (int64_t k = 0; k < p.d3; ++k) ob[k] += wt * t[k];
          }
        }
      }
      if (p.mode == 0) {
        T* ob = o + p.so;
        for (int64_t c = 0; c < m; ++c)
          for (int64_t k = 0; k < p.d3; ++k) ob[c * p.d3 + k] += acc[k * m + c];
      }
    }
  }
}

template <typename T>
void backward_impl(const std::vector<Path>& paths, const std::vector<char>& direct,
                   const T* alpha, const int64_t* nzi,
                   const T* nzc, const T* x1, const T* x2, const T* w, bool shared,
                   int64_t z_n, int64_t d1n, int64_t d2n, int64_t don, int64_t wn,
                   const T* g, T* g1, T* g2, T* gw,
                   const int64_t* src = nullptr, const int64_t* dst = nullptr) {
  const int64_t tile = tile_size(paths);
  std::vector<T> gk(tile), mik(tile), pik(tile);
  T t[kMaxDim], gt[kMaxDim];
  for (int64_t z = 0; z < z_n; ++z) {
    const T* a = x1 + (src ? src[z] : z) * d1n;
    const T* b = x2 + z * d2n;
    const T* wz = shared ? w : w + z * wn;
    const T* gz = g + (dst ? dst[z] : z) * don;
    T* ga = g1 ? g1 + (src ? src[z] : z) * d1n : nullptr;
    T* gb = g2 ? g2 + z * d2n : nullptr;
    T* gwz = gw ? (shared ? gw : gw + z * wn) : nullptr;
    for (size_t q = 0; q < paths.size(); ++q) {
      if (!direct[q]) continue;
      const Path& p = paths[q];
      const T al = alpha[q];
      const int64_t m = p.mulo;
      if (p.mode == 0) {  // k-major copy of the output gradient's block
        const T* src = gz + p.so;
        for (int64_t c = 0; c < m; ++c)
          for (int64_t k = 0; k < p.d3; ++k) gk[k * m + c] = src[c * p.d3 + k];
      }
      for (int64_t v = 0; v < p.mul2; ++v) {
        bind(p, nzi, nzc, b + p.s2 + v * p.d2, mik.data());
        if (gb) std::fill(pik.begin(), pik.begin() + p.d1 * p.d3, T(0));
        for (int64_t u = 0; u < p.mul1; ++u) {
          const T* au = a + p.s1 + u * p.d1;
          if (gwz) couple(p, au, mik.data(), t);
          if (p.mode == 0) {
            const T* wp = wz + p.woff + (u * p.mul2 + v) * m;
            T* gwp = gwz ? gwz + p.woff + (u * p.mul2 + v) * m : nullptr;
            for (int64_t k = 0; k < p.d3; ++k) {
              const T* gkk = gk.data() + k * m;
              T s = T(0);
              for (int64_t c = 0; c < m; ++c) s += wp[c] * gkk[c];
              gt[k] = al * s;
              if (gwp) {
                const T tk = al * t[k];
                for (int64_t c = 0; c < m; ++c) gwp[c] += tk * gkk[c];
              }
            }
          } else {
            const T* gu = gz + p.so + u * p.d3;
            const int64_t wi = p.woff + u * p.mul2 + v;
            const T wt = al * wz[wi];
            T s = T(0);
            for (int64_t k = 0; k < p.d3; ++k) {
              gt[k] = wt * gu[k];
              if (gwz) s += t[k] * gu[k];
            }
            if (gwz) gwz[wi] += al * s;
          }
          if (ga || gb)
            uncouple(p, au, mik.data(), gt, ga ? ga + p.s1 + u * p.d1 : nullptr,
                     gb ? pik.data() : nullptr);
        }
        if (gb) {  // gb[j] += sum_{ik} C_ijk P[i][k], the sparse step once per v
          T* gbv = gb + p.s2 + v * p.d2;
          for (int64_t n = p.nz0; n < p.nz0 + p.nnz; ++n) {
            const int64_t* e = nzi + 3 * n;
            gbv[e[1]] += nzc[n] * pik[e[0] * p.d3 + e[2]];
          }
        }
      }
    }
  }
}

// Output blocks fed only by shared-weight uvw paths are evaluated as one matrix product per
// block and tile of rows: Y[(z, k), r] (r = the block's (path, v, u) rows) times the
// block's weights Wb[r, w] = alpha_p W_p[u, v, w], through ATen's GEMM.  Y is filled in one
// pass per tile: for each x1 block, T[u, :] = x1[u, :] M (M = every coupling leaving that
// block, bound to this row's x2, side by side), so the coupling is a dense, vectorisable
// row update whatever the path count.
struct Block {
  int64_t so, mulo, d3, rows;
  std::vector<std::pair<int64_t, int64_t>> paths;  // (path index, first row)
};

struct Kern {          // one (path, v) of an x1 block: columns c0 .. c0 + d3 of M
  int64_t q, v, c0, blk, r0;
};

struct Group {         // the shared-uvw paths leaving one x1 block
  int64_t s1, mul1, d1, width;
  std::vector<Kern> kerns;
};

struct Plan {
  std::vector<Block> blocks;
  std::vector<Group> groups;
  std::vector<char> direct;
};

constexpr int64_t kTile = 128;

Plan make_plan(const std::vector<Path>& paths, bool shared) {
  Plan plan;
  plan.direct.assign(paths.size(), 1);
  if (!shared) return plan;
  for (size_t q = 0; q < paths.size(); ++q) {
    const Path& p = paths[q];
    if (p.mode != 0) continue;
    plan.direct[q] = 0;
    auto bi = std::find_if(plan.blocks.begin(), plan.blocks.end(),
                           [&](const Block& b) { return b.so == p.so; });
    if (bi == plan.blocks.end()) {
      plan.blocks.push_back(Block{p.so, p.mulo, p.d3, 0, {}});
      bi = plan.blocks.end() - 1;
    }
    const int64_t r0 = bi->rows;
    bi->paths.emplace_back(static_cast<int64_t>(q), r0);
    bi->rows += p.mul1 * p.mul2;
    auto gi = std::find_if(plan.groups.begin(), plan.groups.end(),
                           [&](const Group& g) { return g.s1 == p.s1; });
    if (gi == plan.groups.end()) {
      plan.groups.push_back(Group{p.s1, p.mul1, p.d1, 0, {}});
      gi = plan.groups.end() - 1;
    }
    for (int64_t v = 0; v < p.mul2; ++v) {
      gi->kerns.push_back(Kern{static_cast<int64_t>(q), v, gi->width,
                               static_cast<int64_t>(bi - plan.blocks.begin()),
                               r0 + v * p.mul1});
      gi->width += p.d3;
    }
  }
  return plan;
}

int64_t widest(const Plan& plan) {
  int64_t w = 1;
  for (const Group& g : plan.groups) w = std::max(w, g.d1 * g.width);
  return w;
}

// M[i, c0 + k] = sum_j C_ijk x2[v, j] for every kernel of the group.
template <typename T>
void bind_group(const Group& g, const std::vector<Path>& paths, const int64_t* nzi,
                const T* nzc, const T* b, T* mm) {
  std::fill(mm, mm + g.d1 * g.width, T(0));
  for (const Kern& kn : g.kerns) {
    const Path& p = paths[kn.q];
    const T* bv = b + p.s2 + kn.v * p.d2;
    for (int64_t n = p.nz0; n < p.nz0 + p.nnz; ++n) {
      const int64_t* e = nzi + 3 * n;
      mm[e[0] * g.width + kn.c0 + e[2]] += nzc[n] * bv[e[1]];
    }
  }
}

template <typename T>
void block_weights(const Block& blk, const std::vector<Path>& paths, const T* alpha,
                   const T* w, T* wb) {
  for (auto [q, r0] : blk.paths) {
    const Path& p = paths[q];
    for (int64_t v = 0; v < p.mul2; ++v)
      for (int64_t u = 0; u < p.mul1; ++u) {
        const T* src = w + p.woff + (u * p.mul2 + v) * p.mulo;
        T* dst = wb + (r0 + v * p.mul1 + u) * blk.mulo;
        for (int64_t c = 0; c < p.mulo; ++c) dst[c] = alpha[q] * src[c];
      }
  }
}

// Y rows of edges z0 .. z1 of every block: Y_b[((z - z0) * d3 + k) * rows + r] = t_r[k].
template <typename T>
void fill_rows(const Plan& plan, const std::vector<Path>& paths, const int64_t* nzi,
               const T* nzc, const T* x1, const T* x2, int64_t d1n, int64_t d2n, int64_t z0,
               int64_t z1, T* mm, T* tt, const std::vector<T*>& ys) {
  for (int64_t z = z0; z < z1; ++z) {
    const T* a = x1 + z * d1n;
    const T* b = x2 + z * d2n;
    for (const Group& g : plan.groups) {
      bind_group(g, paths, nzi, nzc, b, mm);
      const int64_t wd = g.width;
      for (int64_t u = 0; u < g.mul1; ++u) {
        const T* au = a + g.s1 + u * g.d1;
        std::fill(tt, tt + wd, T(0));
        for (int64_t i = 0; i < g.d1; ++i) {
          const T ai = au[i];
          const T* mi = mm + i * wd;
          for (int64_t c = 0; c < wd; ++c) tt[c] += ai * mi[c];
        }
        for (const Kern& kn : g.kerns) {
          const Block& blk = plan.blocks[kn.blk];
          T* yz = ys[kn.blk] + (z - z0) * blk.d3 * blk.rows + kn.r0 + u;
          for (int64_t k = 0; k < blk.d3; ++k) yz[k * blk.rows] = tt[kn.c0 + k];
        }
      }
    }
  }
}

struct Buffers {
  std::vector<torch::Tensor> wb, y, other;
  std::vector<void*> yp;
};

template <typename T>
Buffers buffers(const Plan& plan, const std::vector<Path>& paths, const T* alpha, const T* w,
                int64_t z_n, const torch::TensorOptions& opts, bool other) {
  Buffers buf;
  const int64_t tile = std::min(kTile, z_n);
  for (const Block& blk : plan.blocks) {
    auto wb = torch::empty({blk.rows, blk.mulo}, opts);
    block_weights(blk, paths, alpha, w, wb.data_ptr<T>());
    buf.wb.push_back(wb);
    buf.y.push_back(torch::empty({tile * blk.d3, blk.rows}, opts));
    if (other) buf.other.push_back(torch::empty({tile * blk.d3, blk.mulo}, opts));
  }
  return buf;
}

template <typename T>
std::vector<T*> pointers(const std::vector<torch::Tensor>& ts) {
  std::vector<T*> out;
  for (const auto& t : ts) out.push_back(t.data_ptr<T>());
  return out;
}

template <typename T>
void blocks_forward(const Plan& plan, const std::vector<Path>& paths, const T* alpha,
                    const int64_t* nzi, const T* nzc, const torch::Tensor& x1,
                    const torch::Tensor& x2, const torch::Tensor& w, torch::Tensor& out) {
  if (plan.blocks.empty()) return;
  const int64_t z_n = x1.size(0), don = out.size(1);
  Buffers buf = buffers<T>(plan, paths, alpha, w.data_ptr<T>(), z_n, x1.options(), true);
  auto ys = pointers<T>(buf.y);
  std::vector<T> mm(widest(plan)), tt(widest(plan));
  T* o = out.data_ptr<T>();
  for (int64_t z0 = 0; z0 < z_n; z0 += kTile) {
    const int64_t z1 = std::min(z_n, z0 + kTile);
    fill_rows(plan, paths, nzi, nzc, x1.data_ptr<T>(), x2.data_ptr<T>(), x1.size(1),
              x2.size(1), z0, z1, mm.data(), tt.data(), ys);
    for (size_t bi = 0; bi < plan.blocks.size(); ++bi) {
      const Block& blk = plan.blocks[bi];
      const int64_t n = (z1 - z0) * blk.d3, d3 = blk.d3, m = blk.mulo;
      auto pv = buf.other[bi].narrow(0, 0, n);
      at::mm_out(pv, buf.y[bi].narrow(0, 0, n), buf.wb[bi]);
      const T* pr = pv.data_ptr<T>();
      for (int64_t z = z0; z < z1; ++z) {
        T* ob = o + z * don + blk.so;
        const T* pz = pr + (z - z0) * d3 * m;
        for (int64_t k = 0; k < d3; ++k)
          for (int64_t c = 0; c < m; ++c) ob[c * d3 + k] += pz[k * m + c];
      }
    }
  }
}

template <typename T>
void blocks_backward(const Plan& plan, const std::vector<Path>& paths, const T* alpha,
                     const int64_t* nzi, const T* nzc, const torch::Tensor& x1,
                     const torch::Tensor& x2, const torch::Tensor& w, const torch::Tensor& g,
                     T* g1, T* g2, T* gw) {
  if (plan.blocks.empty()) return;
  const int64_t z_n = x1.size(0), d1n = x1.size(1), d2n = x2.size(1), don = g.size(1);
  auto opts = x1.options();
  Buffers buf = buffers<T>(plan, paths, alpha, w.data_ptr<T>(), z_n, opts, true);
  std::vector<torch::Tensor> gy, gwb;
  for (size_t bi = 0; bi < plan.blocks.size(); ++bi) {
    gy.push_back(torch::empty_like(buf.y[bi]));
    if (gw) gwb.push_back(torch::zeros_like(buf.wb[bi]));
  }
  auto ys = pointers<T>(buf.y);
  auto gyp = pointers<T>(gy);
  std::vector<T> mm(widest(plan)), tt(widest(plan)), pk(widest(plan));
  const T* a_all = x1.data_ptr<T>();
  const T* b_all = x2.data_ptr<T>();
  const T* g_all = g.data_ptr<T>();
  for (int64_t z0 = 0; z0 < z_n; z0 += kTile) {
    const int64_t z1 = std::min(z_n, z0 + kTile);
    if (gw)
      fill_rows(plan, paths, nzi, nzc, a_all, b_all, d1n, d2n, z0, z1, mm.data(), tt.data(),
                ys);
    for (size_t bi = 0; bi < plan.blocks.size(); ++bi) {
      const Block& blk = plan.blocks[bi];
      const int64_t d3 = blk.d3, m = blk.mulo, n = (z1 - z0) * d3;
      T* gm = buf.other[bi].data_ptr<T>();
      for (int64_t z = z0; z < z1; ++z) {
        const T* src = g_all + z * don + blk.so;
        T* dst = gm + (z - z0) * d3 * m;
        for (int64_t c = 0; c < m; ++c)
          for (int64_t k = 0; k < d3; ++k) dst[k * m + c] = src[c * d3 + k];
      }
      auto gmv = buf.other[bi].narrow(0, 0, n);
      if (gw) gwb[bi].addmm_(buf.y[bi].narrow(0, 0, n).t(), gmv);
      if (g1 || g2) {
        auto gyv = gy[bi].narrow(0, 0, n);
        at::mm_out(gyv, gmv, buf.wb[bi].t());
      }
    }
    if (!g1 && !g2) continue;
    for (int64_t z = z0; z < z1; ++z) {
      const T* a = a_all + z * d1n;
      const T* b = b_all + z * d2n;
      for (const Group& gr : plan.groups) {
        bind_group(gr, paths, nzi, nzc, b, mm.data());
        const int64_t wd = gr.width;
        if (g2) std::fill(pk.begin(), pk.begin() + gr.d1 * wd, T(0));
        for (int64_t u = 0; u < gr.mul1; ++u) {
          for (const Kern& kn : gr.kerns) {
            const Block& blk = plan.blocks[kn.blk];
            const T* gz = gyp[kn.blk] + (z - z0) * blk.d3 * blk.rows + kn.r0 + u;
            for (int64_t k = 0; k < blk.d3; ++k) tt[kn.c0 + k] = gz[k * blk.rows];
          }
          const T* au = a + gr.s1 + u * gr.d1;
          T* gau = g1 ? g1 + z * d1n + gr.s1 + u * gr.d1 : nullptr;
          for (int64_t i = 0; i < gr.d1; ++i) {
            const T* mi = mm.data() + i * wd;
            if (gau) {
              T s = T(0);
              for (int64_t c = 0; c < wd; ++c) s += mi[c] * tt[c];
              gau[i] += s;
            }
            if (g2) {
              const T ai = au[i];
              T* pi = pk.data() + i * wd;
              for (int64_t c = 0; c < wd; ++c) pi[c] += ai * tt[c];
            }
          }
        }
        if (g2) {  // gb[j] += sum_{ik} C_ijk P[i, c0 + k], the sparse step once per kernel
          for (const Kern& kn : gr.kerns) {
            const Path& p = paths[kn.q];
            T* gbv = g2 + z * d2n + p.s2 + kn.v * p.d2;
            for (int64_t e = p.nz0; e < p.nz0 + p.nnz; ++e) {
              const int64_t* ix = nzi + 3 * e;
              gbv[ix[1]] += nzc[e] * pk[ix[0] * wd + kn.c0 + ix[2]];
            }
          }
        }
      }
    }
  }
  if (gw) {
    for (size_t bi = 0; bi < plan.blocks.size(); ++bi) {
      const Block& blk = plan.blocks[bi];
      const T* gp = gwb[bi].data_ptr<T>();
      for (auto [q, r0] : blk.paths) {
        const Path& p = paths[q];
        for (int64_t v = 0; v < p.mul2; ++v)
          for (int64_t u = 0; u < p.mul1; ++u) {
            T* dst = gw + p.woff + (u * p.mul2 + v) * p.mulo;
            const T* src = gp + (r0 + v * p.mul1 + u) * blk.mulo;
            for (int64_t c = 0; c < p.mulo; ++c) dst[c] += alpha[q] * src[c];
          }
      }
    }
  }
}

// What every entry point needs of its inputs whatever their row counts: contiguous CPU
// tensors of one floating dtype and int64 3j indices.
void check_inputs(const torch::Tensor& x1, const torch::Tensor& x2, const torch::Tensor& w,
                  const torch::Tensor& alpha, const torch::Tensor& nzi,
                  const torch::Tensor& nzc) {
  TORCH_CHECK(x1.is_contiguous() && x2.is_contiguous() && w.is_contiguous(),
              "inputs must be contiguous");
  TORCH_CHECK(x1.dtype() == x2.dtype() && x1.dtype() == w.dtype() &&
                  x1.dtype() == alpha.dtype() && x1.dtype() == nzc.dtype(),
              "every floating input must share one dtype");
  TORCH_CHECK(nzi.dtype() == torch::kInt64 && nzi.is_contiguous(), "nzi must be int64");
  TORCH_CHECK(x1.device().is_cpu(), "the compiled kernel runs on the CPU");
}

void check_args(const torch::Tensor& x1, const torch::Tensor& x2, const torch::Tensor& w,
                const torch::Tensor& alpha, const torch::Tensor& nzi, const torch::Tensor& nzc,
                bool shared) {
  TORCH_CHECK(x1.dim() == 2 && x2.dim() == 2 && x1.size(0) == x2.size(0),
              "x1 and x2 must be [Z, D] with one row per sample");
  check_inputs(x1, x2, w, alpha, nzi, nzc);
  TORCH_CHECK(shared ? w.dim() == 1 : (w.dim() == 2 && w.size(0) == x1.size(0)),
              "weights must be [W] (shared) or [Z, W]");
}

}  // namespace

torch::Tensor tp_forward(torch::Tensor x1, torch::Tensor x2, torch::Tensor w,
                         torch::Tensor paths, torch::Tensor alpha, torch::Tensor nzi,
                         torch::Tensor nzc, int64_t dim_out, bool shared) {
  check_args(x1, x2, w, alpha, nzi, nzc, shared);
  auto table = read_paths(paths);
  Plan plan = make_plan(table, shared);
  auto out = torch::zeros({x1.size(0), dim_out}, x1.options());
  const int64_t wn = w.size(-1);
  AT_DISPATCH_FLOATING_TYPES(x1.scalar_type(), "tp_forward", [&] {
    blocks_forward<scalar_t>(plan, table, alpha.data_ptr<scalar_t>(), nzi.data_ptr<int64_t>(),
                             nzc.data_ptr<scalar_t>(), x1, x2, w, out);
    forward_impl<scalar_t>(table, plan.direct, alpha.data_ptr<scalar_t>(), nzi.data_ptr<int64_t>(),
                           nzc.data_ptr<scalar_t>(), x1.data_ptr<scalar_t>(),
                           x2.data_ptr<scalar_t>(), w.data_ptr<scalar_t>(), shared,
                           x1.size(0), x1.size(1), x2.size(1), dim_out, wn,
                           out.data_ptr<scalar_t>());
  });
  return out;
}

std::vector<torch::Tensor> tp_backward(torch::Tensor g, torch::Tensor x1, torch::Tensor x2,
                                       torch::Tensor w, torch::Tensor paths,
                                       torch::Tensor alpha, torch::Tensor nzi,
                                       torch::Tensor nzc, bool shared, bool need1, bool need2,
                                       bool needw) {
  check_args(x1, x2, w, alpha, nzi, nzc, shared);
  TORCH_CHECK(g.is_contiguous() && g.dtype() == x1.dtype() && g.size(0) == x1.size(0),
              "the output gradient must match the product's output");
  auto table = read_paths(paths);
  Plan plan = make_plan(table, shared);
  auto g1 = need1 ? torch::zeros_like(x1) : torch::Tensor();
  auto g2 = need2 ? torch::zeros_like(x2) : torch::Tensor();
  auto gw = needw ? torch::zeros_like(w) : torch::Tensor();
  const int64_t wn = w.size(-1);
  AT_DISPATCH_FLOATING_TYPES(x1.scalar_type(), "tp_backward", [&] {
    blocks_backward<scalar_t>(plan, table, alpha.data_ptr<scalar_t>(), nzi.data_ptr<int64_t>(),
                              nzc.data_ptr<scalar_t>(), x1, x2, w, g,
                               need1 ? g1.data_ptr<scalar_t>() : nullptr,
                               need2 ? g2.data_ptr<scalar_t>() : nullptr,
                               needw ? gw.data_ptr<scalar_t>() : nullptr);
    backward_impl<scalar_t>(table, plan.direct, alpha.data_ptr<scalar_t>(), nzi.data_ptr<int64_t>(),
                            nzc.data_ptr<scalar_t>(), x1.data_ptr<scalar_t>(),
                            x2.data_ptr<scalar_t>(), w.data_ptr<scalar_t>(), shared,
                            x1.size(0), x1.size(1), x2.size(1), g.size(1), wn,
                            g.data_ptr<scalar_t>(), need1 ? g1.data_ptr<scalar_t>() : nullptr,
                            need2 ? g2.data_ptr<scalar_t>() : nullptr,
                            needw ? gw.data_ptr<scalar_t>() : nullptr);
  });
  return {g1, g2, gw};
}

// The gated family's message step in one pass: out[dst[e]] += TP(x1[src[e]], x2[e], w[e])
// (a sum over each node's incoming edges), and its backward, for products without
// shared-weight uvw blocks (those take the unfused route in Python).  No per-edge copy of
// x1 and no per-edge message is written; the sums run edge by edge in order, so results
// are deterministic.
void check_edge_shapes(const torch::Tensor& x2, const torch::Tensor& src,
                       const torch::Tensor& dst) {
  TORCH_CHECK(src.dtype() == torch::kInt64 && dst.dtype() == torch::kInt64 &&
                  src.is_contiguous() && dst.is_contiguous() && src.dim() == 1 &&
                  dst.dim() == 1 && src.size(0) == x2.size(0) && dst.size(0) == x2.size(0),
              "src and dst must be int64 [E], one per row of x2");
}

// The forward also checks the index ranges (a min and a max of each); the backward gets the
// same tensors back from autograd, which refuses ones changed in place since, so it checks
// shapes only.
void check_edges(const torch::Tensor& x1, const torch::Tensor& x2, const torch::Tensor& src,
                 const torch::Tensor& dst, int64_t n_out) {
  check_edge_shapes(x2, src, dst);
  if (x2.size(0) > 0) {
    TORCH_CHECK(src.min().item<int64_t>() >= 0 && src.max().item<int64_t>() < x1.size(0),
                "src indexes past x1");
    TORCH_CHECK(dst.min().item<int64_t>() >= 0 && dst.max().item<int64_t>() < n_out,
                "dst indexes past the output");
  }
}

torch::Tensor tp_scatter_forward(torch::Tensor x1, torch::Tensor x2, torch::Tensor w,
                                 torch::Tensor src, torch::Tensor dst, int64_t n_out,
                                 torch::Tensor paths, torch::Tensor alpha, torch::Tensor nzi,
                                 torch::Tensor nzc, int64_t dim_out) {
  TORCH_CHECK(x1.dim() == 2 && x2.dim() == 2 && w.dim() == 2 && w.size(0) == x2.size(0),
              "x1 [N, D1], x2 [E, D2] and per-edge weights [E, W] expected");
  check_inputs(x1, x2, w, alpha, nzi, nzc);
  check_edges(x1, x2, src, dst, n_out);
  auto table = read_paths(paths);
  Plan plan = make_plan(table, false);
  auto out = torch::zeros({n_out, dim_out}, x1.options());
  AT_DISPATCH_FLOATING_TYPES(x1.scalar_type(), "tp_scatter_forward", [&] {
    forward_impl<scalar_t>(table, plan.direct, alpha.data_ptr<scalar_t>(),
                           nzi.data_ptr<int64_t>(), nzc.data_ptr<scalar_t>(),
                           x1.data_ptr<scalar_t>(), x2.data_ptr<scalar_t>(),
                           w.data_ptr<scalar_t>(), false, x2.size(0), x1.size(1), x2.size(1),
                           dim_out, w.size(1), out.data_ptr<scalar_t>(),
                           src.data_ptr<int64_t>(), dst.data_ptr<int64_t>());
  });
  return out;
}

std::vector<torch::Tensor> tp_scatter_backward(torch::Tensor g, torch::Tensor x1,
                                               torch::Tensor x2, torch::Tensor w,
                                               torch::Tensor src, torch::Tensor dst,
                                               torch::Tensor paths, torch::Tensor alpha,
                                               torch::Tensor nzi, torch::Tensor nzc,
                                               bool need1, bool need2, bool needw) {
  TORCH_CHECK(g.is_contiguous() && g.dtype() == x1.dtype(), "bad output gradient");
  check_inputs(x1, x2, w, alpha, nzi, nzc);
  check_edge_shapes(x2, src, dst);
  auto table = read_paths(paths);
  Plan plan = make_plan(table, false);
  auto g1 = need1 ? torch::zeros_like(x1) : torch::Tensor();
  auto g2 = need2 ? torch::zeros_like(x2) : torch::Tensor();
  auto gw = needw ? torch::zeros_like(w) : torch::Tensor();
  AT_DISPATCH_FLOATING_TYPES(x1.scalar_type(), "tp_scatter_backward", [&] {
    backward_impl<scalar_t>(table, plan.direct, alpha.data_ptr<scalar_t>(),
                            nzi.data_ptr<int64_t>(), nzc.data_ptr<scalar_t>(),
                            x1.data_ptr<scalar_t>(), x2.data_ptr<scalar_t>(),
                            w.data_ptr<scalar_t>(), false, x2.size(0), x1.size(1), x2.size(1),
                            g.size(1), w.size(1), g.data_ptr<scalar_t>(),
                            need1 ? g1.data_ptr<scalar_t>() : nullptr,
                            need2 ? g2.data_ptr<scalar_t>() : nullptr,
                            needw ? gw.data_ptr<scalar_t>() : nullptr,
                            src.data_ptr<int64_t>(), dst.data_ptr<int64_t>());
  });
  return {g1, g2, gw};
}

PYBIND11_MODULE(TORCH_EXTENSION_NAME, m) {
  m.def("tp_forward", &tp_forward, "weighted uvw/uvu tensor product, forward");
  m.def("tp_backward", &tp_backward, "weighted uvw/uvu tensor product, backward");
  m.def("tp_scatter_forward", &tp_scatter_forward, "gathered product summed at receivers");
  m.def("tp_scatter_backward", &tp_scatter_backward, "its backward");
}
