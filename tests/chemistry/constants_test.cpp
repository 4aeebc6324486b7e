// The shipped constants library: complete for the metals and reagents the
// project promises, readable from its file, and strict about malformed entries.
#include "chemistry/constants.hpp"

#include <gtest/gtest.h>

#include <string>

#include "chemistry/constants_file.hpp"
#include "chemistry/ligand.hpp"

namespace veq::chemistry {
namespace {

TEST(ConstantsLibrary, ShippedLibraryCoversTheRequiredChemistry) {
  auto lib = builtin_constants_library();
  ASSERT_TRUE(lib.has_value()) << lib.error().message;
  const auto* edta = lib->find_ligand("EDTA");
  ASSERT_NE(edta, nullptr);
  for (const char* metal :
       {"Ca", "Mg", "Zn", "Cu", "Ni", "Pb", "Co", "Cd", "Mn", "Fe(III)", "Al", "Ba", "Sr", "Hg"}) {
    ASSERT_NE(lib->find_metal(metal), nullptr) << metal;
    EXPECT_NE(edta->one_to_one(metal), nullptr) << metal;
  }
  // EDTA acid constants as in Harris 8th ed., Section 11-2 (recalled from memory);
  // they give alpha(Y4-) = 0.30 at pH 10 (Table 11-1).
  const auto pka = edta->pka_values();
  ASSERT_EQ(pka.size(), 6u);
  EXPECT_NEAR(pka.back(), 10.37, 1e-9);
  EXPECT_NEAR(fully_deprotonated_fraction(pka, 10.0), 0.30, 0.005);
  int titrants = 0, indicators = 0;
  for (const auto& l : lib->ligands) {
    if (l.role == LigandRole::titrant)
      ++titrants;
    if (l.role == LigandRole::indicator) {
      ++indicators;
      EXPECT_FALSE(l.absorptivities.empty()) << l.name;
    }
    for (const auto& p : l.protonation)
      EXPECT_FALSE(lib->citation(p.value.source).empty());
    for (const auto& c : l.complexes)
      EXPECT_FALSE(lib->citation(c.value.source).empty());
  }
  EXPECT_GE(titrants, 2);
  EXPECT_GE(indicators, 2);
  EXPECT_NE(lib->find_ligand("ammonia"), nullptr);
  EXPECT_NE(lib->find_ligand("ethylenediamine"), nullptr);
  EXPECT_FALSE(lib->find_metal("Zn")->hydrolysis.empty());
}

TEST(ConstantsLibrary, FileOnDiskIsTheCompiledInLibrary) {
  auto from_file =
      load_constants_library(std::string(VEQ_SOURCE_DIR) + "/chemistry/data/constants.json");
  ASSERT_TRUE(from_file.has_value()) << from_file.error().message;
  auto builtin = builtin_constants_library();
  ASSERT_TRUE(builtin.has_value());
  EXPECT_EQ(from_file->ligands.size(), builtin->ligands.size());
  EXPECT_EQ(from_file->metals.size(), builtin->metals.size());
  auto missing = load_constants_library("/nonexistent/constants.json");
  ASSERT_FALSE(missing.has_value());
  EXPECT_EQ(missing.error().kind, ErrorKind::not_found);
}

TEST(ConstantsLibrary, MalformedEntriesAreNamed) {
  const std::string head = R"({"sources": {"a": "A book"},
    "water": {"log10_beta": -14, "temperature_c": 25, "ionic_strength_mol_per_l": 0, "source": "a", "recalled_from_memory": false},
    "metals": [{"name": "Ca", "charge": 2}], "ligands": [)";
  auto expect_error = [&](const std::string& ligands, const std::string& fragment) {
    auto r = ConstantsLibrary::parse(head + ligands + "]}");
    ASSERT_FALSE(r.has_value()) << ligands;
    EXPECT_NE(r.error().message.find(fragment), std::string::npos) << r.error().message;
  };
  expect_error(R"({"name": "X", "charge": -2, "role": "titrant", "complexes": [
      {"metal": "Ca", "temperature_c": 25, "ionic_strength_mol_per_l": 0.1, "source": "a", "recalled_from_memory": false}]})",
               "ligands[0] 'X' complexes[0]: log10_beta is missing");
  expect_error(R"({"name": "X", "charge": -2, "role": "titrant", "complexes": [
      {"metal": "Sr", "log10_beta": 8, "temperature_c": 25, "ionic_strength_mol_per_l": 0.1, "source": "a", "recalled_from_memory": false}]})",
               "metal 'Sr' is not in 'metals'");
  expect_error(R"({"name": "X", "charge": -2, "role": "titrant", "protonation": [
      {"protons": 1, "log10_beta": 8, "temperature_c": 25, "ionic_strength_mol_per_l": 0.1, "source": "b", "recalled_from_memory": false}]})",
               "source 'b'");
  expect_error(R"({"name": "X", "charge": -2, "role": "titrant", "protonation": [
      {"protons": 1, "log10_beta": 8, "temperature_c": 25, "ionic_strength_mol_per_l": 0.1, "source": "a"}]})",
               "recalled_from_memory");
  expect_error(R"({"name": "X", "charge": -2, "role": "catalyst"})", "role 'catalyst'");
  EXPECT_FALSE(ConstantsLibrary::parse("[1, 2").has_value());
}

TEST(ConstantsLibrary, BuildsSystemWithNamedSpecies) {
  auto lib = builtin_constants_library();
  ASSERT_TRUE(lib.has_value());
  SystemRecipe recipe;
  recipe.metals = {"Zn"};
  recipe.ligands = {"EDTA", "ammonia"};
  auto system = build_system(*lib, recipe);
  ASSERT_TRUE(system.has_value()) << system.error().message;
  EXPECT_EQ(system->components[0].name, "H+");
  EXPECT_GE(system->species_index("Zn(EDTA)"), 0);
  EXPECT_GE(system->species_index("Zn(ammonia)4"), 0);
  EXPECT_GE(system->species_index("H2(EDTA)"), 0);
  EXPECT_GE(system->species_index("Zn(OH)4"), 0);
  EXPECT_EQ(system->species_charge(system->species_index("Zn(OH)4")), -2);
  recipe.metals = {"Zn", "Zn"};
  EXPECT_FALSE(build_system(*lib, recipe).has_value());
  recipe.metals = {"Unobtainium"};
  EXPECT_FALSE(build_system(*lib, recipe).has_value());
}

}  // namespace
}  // namespace veq::chemistry
