#include <alloyspec/io/parameter_text.h>

#include <sstream>
#include <vector>

namespace alloyspec
{
  std::map<std::string, std::string> flatten_parameters(const std::string &text)
  {
    std::map<std::string, std::string> flat;
    std::vector<std::string>           path;
    std::istringstream                 in(text);
    for (std::string line; std::getline(in, line);)
      {
        const auto hash = line.find('#');
        if (hash != std::string::npos)
          line.erase(hash);
        std::istringstream words(line);
        std::string        first;
        if (!(words >> first))
          continue;
        if (first == "subsection")
          {
            std::string name;
            std::getline(words, name);
            name.erase(0, name.find_first_not_of(" \t"));
            name.erase(name.find_last_not_of(" \t\r") + 1);
            path.push_back(name);
          }
        else if (first == "end")
          {
            if (!path.empty())
              path.pop_back();
          }
        else if (first == "set")
          {
            std::string rest;
            std::getline(words, rest);
            const auto  eq    = rest.find('=');
            std::string name  = rest.substr(0, eq);
            std::string value = eq == std::string::npos ? "" : rest.substr(eq + 1);
            for (std::string *s : {&name, &value})
              {
                s->erase(0, s->find_first_not_of(" \t"));
                s->erase(s->find_last_not_of(" \t\r") + 1);
              }
            std::string key;
            for (const auto &p : path)
              key += p + "/";
            flat[key + name] = value;
          }
      }
    return flat;
  }
} // namespace alloyspec
