// Class aliases and left-out classes (place/class_map.h): the truth is
// constructed here, label by label.
#include <catch2/catch.hpp>

#include <stdexcept>

#include "tamis/place/class_map.h"

using namespace tamis;

TEST_CASE("aliases merge spellings and excluded classes lose their label", "[classes]") {
  Labelling labels;
  labels.names = {"oak", "oak_tree", "pine", "scraps"};
  labels.label_of = {0, 1, 1, 2, 3, -1, 3};
  labels.given_split.assign(7, SplitName::none);
  const Labelling read = labels;
  ClassMap map;
  CHECK_FALSE(apply_class_map(labels, map).applied);  // an empty map changes nothing
  CHECK(labels.names == read.names);
  map.aliases = {{"oak_tree", "oak"}, {"fir", "pine"}};  // "fir" has no image: listed with 0
  map.excluded = {"scraps", "birch"};
  const ClassMapping m = apply_class_map(labels, map);
  CHECK(m.applied);
  CHECK(labels.names == std::vector<std::string>{"oak", "pine"});
  CHECK(labels.label_of == std::vector<int32_t>{0, 0, 0, 1, -1, -1, -1});
  CHECK(m.class_excluded == std::vector<bool>{false, false, false, false, true, false, true});
  CHECK(m.as_read.names == read.names);
  CHECK(m.as_read.label_of == read.label_of);
  REQUIRE(m.aliases.size() == 2);
  CHECK((m.aliases[0].from == "fir" && m.aliases[0].to == "pine" && m.aliases[0].images == 0));
  CHECK((m.aliases[1].from == "oak_tree" && m.aliases[1].to == "oak" && m.aliases[1].images == 2));
  REQUIRE(m.excluded.size() == 2);
  CHECK((m.excluded[0].label == "birch" && m.excluded[0].images == 0));
  CHECK((m.excluded[1].label == "scraps" && m.excluded[1].images == 2));
  // A merged class can be left out by its new name; an alias may name a new class.
  Labelling again = read;
  ClassMap merge_then_drop;
  merge_then_drop.aliases = {{"oak_tree", "oaks"}, {"oak", "oaks"}};
  merge_then_drop.excluded = {"oaks"};
  const ClassMapping m2 = apply_class_map(again, merge_then_drop);
  CHECK(again.names == std::vector<std::string>{"pine", "scraps"});
  CHECK(again.label_of == std::vector<int32_t>{-1, -1, -1, 0, 1, -1, 1});
  CHECK(m2.excluded[0].images == 3);
}

TEST_CASE("a class map that cannot mean one thing is refused", "[classes]") {
  ClassMap self;
  self.aliases = {{"oak", "oak"}};
  CHECK_THROWS_AS(validate_class_map(self), std::invalid_argument);
  ClassMap chain;
  chain.aliases = {{"a", "b"}, {"b", "c"}};
  CHECK_THROWS_AS(validate_class_map(chain), std::invalid_argument);
  ClassMap empty_name;
  empty_name.aliases = {{"", "oak"}};
  CHECK_THROWS_AS(validate_class_map(empty_name), std::invalid_argument);
  ClassMap fine;
  fine.aliases = {{"a", "c"}, {"b", "c"}};
  fine.excluded = {"d"};
  CHECK_NOTHROW(validate_class_map(fine));
}
