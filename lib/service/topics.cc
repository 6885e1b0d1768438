#include "service/topics.h"

namespace nightjar::service {

void ChannelTopic(std::string_view prefix, std::string_view channel, std::string* topic) {
  topic->assign(prefix);
  topic->push_back('/');
  for (const char c : channel) topic->push_back(c == '.' ? '/' : c);
}

std::string ChannelTopic(std::string_view prefix, std::string_view channel) {
  std::string topic;
  ChannelTopic(prefix, channel, &topic);
  return topic;
}

}  // namespace nightjar::service
