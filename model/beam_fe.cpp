#include "model/beam_fe.h"

#include <algorithm>
#include <cmath>

namespace taut::model {

Mesh BuildMesh(const Member& member, int target_elements) {
  const double length = member.length_m;
  std::vector<double> keys = {0.0, length};
  for (const Sensor& s : member.sensors) keys.push_back(s.position_m);
  std::sort(keys.begin(), keys.end());
  const double merge_tol = 1e-9 * length;
  std::vector<double> unique_keys;
  for (double k : keys) {
    if (unique_keys.empty() || k - unique_keys.back() > merge_tol) unique_keys.push_back(k);
  }
  unique_keys.back() = length;  // a sensor within merge_tol of L cannot occur (validated)

  Mesh mesh;
  const double h_target = length / std::max(1, target_elements);
  mesh.x_m.push_back(0.0);
  for (size_t i = 1; i < unique_keys.size(); ++i) {
    const double a = unique_keys[i - 1];
    const double b = unique_keys[i];
    const int n = std::max(1, static_cast<int>(std::lround((b - a) / h_target)));
    for (int j = 1; j <= n; ++j) mesh.x_m.push_back(j == n ? b : a + (b - a) * j / n);
  }
  for (const Sensor& s : member.sensors) {
    auto it = std::lower_bound(mesh.x_m.begin(), mesh.x_m.end(), s.position_m - merge_tol);
    mesh.sensor_node.push_back(static_cast<int>(it - mesh.x_m.begin()));
  }
  return mesh;
}

Eigen::Matrix4d HermiteBendingStiffness(double h) {
  const double h2 = h * h;
  Eigen::Matrix4d k;
  k << 12, 6 * h, -12, 6 * h,         //
      6 * h, 4 * h2, -6 * h, 2 * h2,  //
      -12, -6 * h, 12, -6 * h,        //
      6 * h, 2 * h2, -6 * h, 4 * h2;
  return k / (h2 * h);
}

Eigen::Matrix4d HermiteGeometricStiffness(double h) {
  const double h2 = h * h;
  Eigen::Matrix4d g;
  g << 36, 3 * h, -36, 3 * h,      //
      3 * h, 4 * h2, -3 * h, -h2,  //
      -36, -3 * h, 36, -3 * h,     //
      3 * h, -h2, -3 * h, 4 * h2;
  return g / (30.0 * h);
}

Eigen::Matrix4d HermiteMass(double h) {
  const double h2 = h * h;
  Eigen::Matrix4d m;
  m << 156, 22 * h, 54, -13 * h,        //
      22 * h, 4 * h2, 13 * h, -3 * h2,  //
      54, 13 * h, 156, -22 * h,         //
      -13 * h, -3 * h2, -22 * h, 4 * h2;
  return m * (h / 420.0);
}

Eigen::Vector4d HermiteUniformLoad(double h) { return Eigen::Vector4d(6.0, h, 6.0, -h) * (h / 12.0); }

namespace {

// Adds the 4x4 element matrix `ke` of element e into `triplets`, dropping
// the rows and columns of removed DOFs.
void Scatter(const Eigen::Matrix4d& ke, int e, int nodes, double scale,
             std::vector<Eigen::Triplet<double>>* triplets) {
  const int dof[4] = {WDof(e, nodes), ThetaDof(e, nodes), WDof(e + 1, nodes), ThetaDof(e + 1, nodes)};
  for (int a = 0; a < 4; ++a) {
    if (dof[a] < 0) continue;
    for (int b = 0; b < 4; ++b) {
      if (dof[b] < 0) continue;
      triplets->emplace_back(dof[a], dof[b], scale * ke(a, b));
    }
  }
}

// Builds a matrix with the full band pattern (every entry any element
// touches, explicit zeros included) plus the given triplets, so that every
// global matrix shares one pattern.
SparseMatrix WithPattern(int n, const std::vector<Eigen::Triplet<double>>& pattern,
                         std::vector<Eigen::Triplet<double>> values) {
  values.reserve(values.size() + pattern.size());
  for (const auto& t : pattern) values.emplace_back(t.row(), t.col(), 0.0);
  SparseMatrix a(n, n);
  a.setFromTriplets(values.begin(), values.end());
  a.makeCompressed();
  return a;
}

}  // namespace

BeamMatrices AssembleBeam(const Member& member, const Mesh& mesh) {
  const int nodes = mesh.Nodes();
  const int n = mesh.FreeDofs();
  const double mass_per_length = member.MassPerLength_kg_m();
  const Eigen::Matrix4d ones = Eigen::Matrix4d::Ones();

  std::vector<Eigen::Triplet<double>> pattern, kb, g, m;
  Eigen::VectorXd weight = Eigen::VectorXd::Zero(n);
  for (int e = 0; e < mesh.Elements(); ++e) {
    const double h = mesh.x_m[e + 1] - mesh.x_m[e];
    Scatter(ones, e, nodes, 0.0, &pattern);
    Scatter(HermiteBendingStiffness(h), e, nodes, 1.0, &kb);
    Scatter(HermiteGeometricStiffness(h), e, nodes, 1.0, &g);
    Scatter(HermiteMass(h), e, nodes, mass_per_length, &m);
    const Eigen::Vector4d fe = HermiteUniformLoad(h) * mass_per_length;
    const int dof[4] = {WDof(e, nodes), ThetaDof(e, nodes), WDof(e + 1, nodes), ThetaDof(e + 1, nodes)};
    for (int a = 0; a < 4; ++a) {
      if (dof[a] >= 0) weight[dof[a]] -= fe[a];
    }
  }
  // Sensor masses: point masses on the w DOF of their node (translational
  // inertia only; the rotary inertia of a small mount is negligible).
  for (size_t i = 0; i < member.sensors.size(); ++i) {
    const int d = WDof(mesh.sensor_node[i], nodes);
    m.emplace_back(d, d, member.sensors[i].mass_kg);
    weight[d] -= member.sensors[i].mass_kg;
  }

  BeamMatrices out;
  out.K_b = WithPattern(n, pattern, std::move(kb));
  out.G = WithPattern(n, pattern, std::move(g));
  out.M = WithPattern(n, pattern, std::move(m));
  out.S_left = WithPattern(n, pattern, {{ThetaDof(0, nodes), ThetaDof(0, nodes), 1.0}});
  out.S_right = WithPattern(n, pattern, {{ThetaDof(nodes - 1, nodes), ThetaDof(nodes - 1, nodes), 1.0}});
  out.weight = weight;
  return out;
}

namespace {

// Element index and the four shape-function values at x.
int ShapeAt(const Mesh& mesh, double x, Eigen::Vector4d* n) {
  const auto it = std::upper_bound(mesh.x_m.begin(), mesh.x_m.end(), x);
  int e = static_cast<int>(it - mesh.x_m.begin()) - 1;
  e = std::clamp(e, 0, mesh.Elements() - 1);
  const double h = mesh.x_m[e + 1] - mesh.x_m[e];
  const double s = std::clamp((x - mesh.x_m[e]) / h, 0.0, 1.0);
  const double s2 = s * s, s3 = s2 * s;
  *n << 1 - 3 * s2 + 2 * s3, h * (s - 2 * s2 + s3), 3 * s2 - 2 * s3, h * (s3 - s2);
  return e;
}

}  // namespace

Eigen::VectorXd PointLoadVector(const Mesh& mesh, double x_m) {
  Eigen::Vector4d n;
  const int e = ShapeAt(mesh, x_m, &n);
  const int nodes = mesh.Nodes();
  const int dof[4] = {WDof(e, nodes), ThetaDof(e, nodes), WDof(e + 1, nodes), ThetaDof(e + 1, nodes)};
  Eigen::VectorXd f = Eigen::VectorXd::Zero(mesh.FreeDofs());
  for (int a = 0; a < 4; ++a) {
    if (dof[a] >= 0) f[dof[a]] += n[a];
  }
  return f;
}

Eigen::VectorXd DistributedLoadVector(const Mesh& mesh, const std::function<double(double)>& q) {
  // 5-point Gauss-Legendre on [0, 1] (Abramowitz and Stegun 1964, Table 25.4).
  static constexpr double kX[5] = {0.04691007703066800, 0.2307653449471585, 0.5, 0.7692346550528415,
                                   0.9530899229693320};
  static constexpr double kW[5] = {0.1184634425280945, 0.2393143352496832, 0.2844444444444444,
                                   0.2393143352496832, 0.1184634425280945};
  Eigen::VectorXd f = Eigen::VectorXd::Zero(mesh.FreeDofs());
  const int nodes = mesh.Nodes();
  for (int e = 0; e < mesh.Elements(); ++e) {
    const double h = mesh.x_m[e + 1] - mesh.x_m[e];
    const int dof[4] = {WDof(e, nodes), ThetaDof(e, nodes), WDof(e + 1, nodes), ThetaDof(e + 1, nodes)};
    for (int g = 0; g < 5; ++g) {
      const double s = kX[g], s2 = s * s, s3 = s2 * s;
      const double n[4] = {1 - 3 * s2 + 2 * s3, h * (s - 2 * s2 + s3), 3 * s2 - 2 * s3, h * (s3 - s2)};
      const double qh = kW[g] * h * q(mesh.x_m[e] + s * h);
      for (int a = 0; a < 4; ++a) {
        if (dof[a] >= 0) f[dof[a]] += qh * n[a];
      }
    }
  }
  return f;
}

double InterpolateW(const Mesh& mesh, const Eigen::VectorXd& q, double x_m) {
  return PointLoadVector(mesh, x_m).dot(q);
}

}  // namespace taut::model
