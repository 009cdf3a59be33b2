// Operator properties of the Hermite beam element and the assembled
// matrices (cf. MFEM's transpose and null-space checks).
#include <gtest/gtest.h>

#include <Eigen/Dense>

#include "model/beam_fe.h"
#include "tests/model/test_support.h"

namespace taut::model {
namespace {

// Element matrices are symmetric; rigid-body motions (translation
// w = 1 and rotation w = x) lie in the null space of the bending stiffness,
// translation in that of the geometric stiffness; the consistent mass and
// load integrate to m h and q h (Cook et al., Concepts and Applications of
// Finite Element Analysis, 2002, sec. 2.3). Tolerances: round-off on
// entries of order 12/h^3.
TEST(BeamElement, SymmetryNullSpaceAndTotals) {
  for (double h : {0.05, 0.3, 1.7}) {
    const Eigen::Matrix4d kb = HermiteBendingStiffness(h);
    const Eigen::Matrix4d g = HermiteGeometricStiffness(h);
    const Eigen::Matrix4d m = HermiteMass(h);
    const double scale = 12.0 / (h * h * h);
    EXPECT_LT((kb - kb.transpose()).norm(), 1e-14 * scale);
    EXPECT_LT((g - g.transpose()).norm(), 1e-14 * scale);
    EXPECT_LT((m - m.transpose()).norm(), 1e-14);
    const Eigen::Vector4d translation(1, 0, 1, 0);
    const Eigen::Vector4d rotation(0, 1, h, 1);  // w = x
    EXPECT_LT((kb * translation).norm(), 1e-12 * scale);
    EXPECT_LT((kb * rotation).norm(), 1e-12 * scale);
    EXPECT_LT((g * translation).norm(), 1e-12 * scale);
    EXPECT_NEAR(translation.dot(m * translation), h, 1e-14);
    EXPECT_NEAR(HermiteUniformLoad(h).dot(translation), h, 1e-14);
    // w = x: int w'^2 dx over the element = h (geometric stiffness energy).
    EXPECT_NEAR(rotation.dot(g * rotation), h, 1e-12);
    // Positive semi-definite with exactly two zero eigenvalues (rigid modes).
    Eigen::SelfAdjointEigenSolver<Eigen::Matrix4d> es(kb);
    EXPECT_NEAR(es.eigenvalues()[0], 0.0, 1e-10 * scale);
    EXPECT_NEAR(es.eigenvalues()[1], 0.0, 1e-10 * scale);
    EXPECT_GT(es.eigenvalues()[2], 1e6 * std::abs(es.eigenvalues()[1]));
  }
}

// Mesh: nodes at the ends and at every sensor, sensors sharing a position
// share a node, element count near the target.
TEST(BeamMesh, NodesAtSensorsAndTargetCount) {
  Member m = testing::PlainBar();
  m.sensors = {{"a", 1.234, 0.0, Direction::kVertical},
               {"b", 4.5, 0.0, Direction::kVertical},
               {"c", 4.5, 0.0, Direction::kLateral}};
  const Mesh mesh = BuildMesh(m, 40);
  ASSERT_EQ(mesh.sensor_node.size(), 3u);
  EXPECT_DOUBLE_EQ(mesh.x_m[mesh.sensor_node[0]], 1.234);
  EXPECT_DOUBLE_EQ(mesh.x_m[mesh.sensor_node[1]], 4.5);
  EXPECT_EQ(mesh.sensor_node[1], mesh.sensor_node[2]);
  EXPECT_DOUBLE_EQ(mesh.x_m.front(), 0.0);
  EXPECT_DOUBLE_EQ(mesh.x_m.back(), m.length_m);
  EXPECT_NEAR(mesh.Elements(), 40, 2);
  for (int i = 1; i < mesh.Nodes(); ++i) EXPECT_GT(mesh.x_m[i], mesh.x_m[i - 1]);
}

// Assembled matrices: symmetric, total translational mass equal to
// m L + sensor masses, total weight load equal to minus that mass.
TEST(BeamAssembly, SymmetricAndMassConserving) {
  Member m = testing::PlainBar();
  m.sensors = {{"a", 2.0, 0.25, Direction::kVertical}};
  const Mesh mesh = BuildMesh(m, 30);
  const BeamMatrices bm = AssembleBeam(m, mesh);
  for (const SparseMatrix* a : {&bm.K_b, &bm.G, &bm.M}) {
    const Eigen::MatrixXd d(*a);
    EXPECT_LT((d - d.transpose()).norm(), 1e-12 * d.norm());
  }
  // The weight vector is the consistent load of a unit downward
  // acceleration; its w entries plus the end reactions sum to the total
  // mass. Check through the work done on a uniform virtual translation
  // restricted to interior w DOFs: sum over all w (end shares included)
  // equals m L + M_sensor, so the interior sum is that minus the two end
  // shares m h_0 / 2 and m h_last / 2.
  double interior = 0.0;
  for (int i = 1; i < mesh.Nodes() - 1; ++i) interior -= bm.weight[WDof(i, mesh.Nodes())];
  const double mass = m.MassPerLength_kg_m();
  const double h0 = mesh.x_m[1] - mesh.x_m[0];
  const double hn = mesh.x_m.back() - mesh.x_m[mesh.Nodes() - 2];
  EXPECT_NEAR(interior, mass * m.length_m + 0.25 - 0.5 * mass * (h0 + hn), 1e-12);
}

// Fixity conversions (Monforton and Wu 1963) round-trip and hit the bounds.
TEST(Fixity, ConversionsRoundTrip) {
  const double ei = 8000.0, length = 5.0;
  EXPECT_EQ(FixityFromStiffness(0.0, ei, length), 0.0);
  EXPECT_EQ(FixityFromStiffness(INFINITY, ei, length), 1.0);
  EXPECT_NEAR(FixityFromStiffness(3.0 * ei / length, ei, length), 0.5, 1e-15);
  for (double r : {0.01, 0.3, 0.5, 0.9, 0.999}) {
    EXPECT_NEAR(FixityFromStiffness(StiffnessFromFixity(r, ei, length), ei, length), r, 1e-12);
  }
  EXPECT_GT(StiffnessFromFixity(1.0, ei, length), 1e9 * ei / length);
}

}  // namespace
}  // namespace taut::model
