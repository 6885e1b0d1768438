#include "core/status.h"

#include <gtest/gtest.h>

namespace nightjar::core {
namespace {

TEST(StatusTest, DefaultIsOk) {
  Status status;
  EXPECT_TRUE(status.ok());
  EXPECT_EQ(status.code(), StatusCode::kOk);
}

TEST(StatusTest, CarriesCodeAndMessage) {
  Status status = Status::InvalidArgument("detector.cusum.k: must be > 0");
  EXPECT_FALSE(status.ok());
  EXPECT_EQ(status.code(), StatusCode::kInvalidArgument);
  EXPECT_EQ(status.message(), "detector.cusum.k: must be > 0");
}

TEST(ResultTest, HoldsValueOrError) {
  Result<int> good(7);
  ASSERT_TRUE(good.ok());
  EXPECT_EQ(*good, 7);
  Result<int> bad(Status::NotFound("channel pump2.flow"));
  EXPECT_FALSE(bad.ok());
  EXPECT_EQ(bad.status().code(), StatusCode::kNotFound);
}

}  // namespace
}  // namespace nightjar::core
