#include <alloyspec/io/parameter_text.h>

#include <gtest/gtest.h>

namespace alloyspec
{
  TEST(ParameterText, FlattensNestedSubsectionsAndDropsComments)
  {
    const auto flat = flatten_parameters("# a comment\n"
                                         "subsection lattice\n"
                                         "  set cells     = 3, 3, 3   # per direction\n"
                                         "  set cell size = 0.5\r\n"
                                         "end\n"
                                         "subsection outer\n"
                                         "  subsection inner\n"
                                         "    set x = \n"
                                         "  end\n"
                                         "  set y = a b\n"
                                         "end\n"
                                         "set top = 1\n");
    ASSERT_EQ(flat.size(), 5u);
    EXPECT_EQ(flat.at("lattice/cells"), "3, 3, 3");
    EXPECT_EQ(flat.at("lattice/cell size"), "0.5");
    EXPECT_EQ(flat.at("outer/inner/x"), "");
    EXPECT_EQ(flat.at("outer/y"), "a b");
    EXPECT_EQ(flat.at("top"), "1");
  }
} // namespace alloyspec
