// Which info findings go out with a result to the record.
#include <gtest/gtest.h>

#include "gateway/core/model.hpp"

namespace pftgw {
namespace {

Finding info(const char* rule) {
    return Finding{rule, Severity::info, "", "", {}};
}

TEST(Findings, GradesAndAdjustmentsTravelNotAssessedNotesDoNot) {
    EXPECT_TRUE(info_travels_to_record(info("quality.grade")));
    EXPECT_TRUE(info_travels_to_record(info("quality.dlco.repeatability")));
    EXPECT_TRUE(info_travels_to_record(info("adjust.hb")));
    EXPECT_FALSE(info_travels_to_record(info("quality.spirometry.not-assessed")));
    EXPECT_FALSE(info_travels_to_record(info("quality.dlco.not-graded")));
    EXPECT_FALSE(info_travels_to_record(info("derive.VI_VC")));
    EXPECT_FALSE(info_travels_to_record(info("dlco.recomputed")));
}

}  // namespace
}  // namespace pftgw
