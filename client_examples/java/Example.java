// Fit the greenhouse demo scenario with Java 17's java.net.http (no libraries).
//
//   BASE_URL=http://127.0.0.1:8000 java client_examples/java/Example.java
//
// Reads the invented greenhouse trial (client_examples/data/greenhouse.json, made by
// scripts/demo_data.py), lets the service choose the degree, prints the chosen degree, the
// sequential table and a prediction at EC 3.5 dS/m made from the returned
// fitted-model document, which is sent back byte for byte as the service wrote it.
// JSON is read by the small parser at the end of this file. Set API_TOKEN if auth is on.

import java.net.URI;
import java.net.http.HttpClient;
import java.net.http.HttpRequest;
import java.net.http.HttpResponse;
import java.nio.charset.StandardCharsets;
import java.nio.file.Files;
import java.nio.file.Path;
import java.time.Duration;
import java.util.ArrayList;
import java.util.LinkedHashMap;
import java.util.List;
import java.util.Locale;
import java.util.Map;

public class Example {
    static final double NEW_EC = 3.5;

    public static void main(String[] args) throws Exception {
        String baseUrl = System.getenv().getOrDefault("BASE_URL", "http://127.0.0.1:8000")
                .replaceAll("/+$", "");
        Path data = dataFile();
        String body = Files.readString(data, StandardCharsets.UTF_8);
        HttpClient http = HttpClient.newBuilder().connectTimeout(Duration.ofSeconds(10)).build();

        String fitText = post(http, baseUrl + "/v1/fit", body);
        Map<String, Object> fit = Json.object(fitText);
        String document = Json.rawMember(fitText, "fitted_model");
        String predictBody = "{\"fitted_model\":" + document + ",\"x\":[" + NEW_EC + "]}";
        Map<String, Object> predicted = Json.object(post(http, baseUrl + "/v1/predict", predictBody));
        Map<?, ?> p = (Map<?, ?>) ((List<?>) predicted.get("predictions")).get(0);
        Map<?, ?> selection = (Map<?, ?>) fit.get("selection");
        double level = (Double) Json.object(body).get("level");

        System.out.printf("Greenhouse nutrient trial (invented demo data): %d benches%n",
                ((Double) fit.get("n")).intValue());
        System.out.printf("chosen degree: %d (%s)%n", ((Double) selection.get("chosen_degree")).intValue(),
                selection.get("method"));
        System.out.println("sequential table:");
        System.out.printf("%-10s%4s%16s%14s%12s%12s%n", "term", "df", "sum_of_squares",
                "mean_square", "F", "p_value");
        for (Object item : (List<?>) fit.get("anova")) {
            Map<?, ?> row = (Map<?, ?>) item;
            StringBuilder line = new StringBuilder(String.format(Locale.ROOT, "%-10s%4d%16s%14s",
                    row.get("term"), ((Double) row.get("df")).intValue(), g(row.get("sum_of_squares"), 6),
                    g(row.get("mean_square"), 6)));
            if (row.get("f") != null) {
                line.append(String.format(Locale.ROOT, "%12s%12s", g(row.get("f"), 6), g(row.get("p_value"), 4)));
            }
            System.out.println(line);
        }
        System.out.printf(Locale.ROOT, "prediction at x = %s: fit %s, %d%% new-observation band %s to %s%n",
                NEW_EC, g(p.get("fit"), 6), Math.round(100 * level), g(p.get("obs_lower"), 6),
                g(p.get("obs_upper"), 6));
    }

    static Path dataFile() {
        for (String candidate : new String[] {"client_examples/data/greenhouse.json", "../data/greenhouse.json",
                "data/greenhouse.json"}) {
            Path path = Path.of(candidate);
            if (Files.exists(path)) return path;
        }
        throw new IllegalStateException("run from the repository root: greenhouse.json not found");
    }

    static String post(HttpClient http, String url, String json) throws Exception {
        HttpRequest.Builder request = HttpRequest.newBuilder(URI.create(url))
                .timeout(Duration.ofSeconds(30))
                .header("Content-Type", "application/json")
                .header("Accept", "application/json")
                .POST(HttpRequest.BodyPublishers.ofString(json, StandardCharsets.UTF_8));
        String token = System.getenv("API_TOKEN");
        if (token != null && !token.isEmpty()) request.header("Authorization", "Bearer " + token);
        HttpResponse<String> response = http.send(request.build(),
                HttpResponse.BodyHandlers.ofString(StandardCharsets.UTF_8));
        if (response.statusCode() >= 400) {
            // Every error is RFC 9457 problem details: detail says what to do, errors names fields.
            Map<String, Object> problem = Json.object(response.body());
            System.err.printf("error %d: %s%n", response.statusCode(), problem.get("detail"));
            Object errors = problem.get("errors");
            if (errors instanceof Map<?, ?> map) {
                map.forEach((field, messages) -> System.err.printf("  %s: %s%n", field, messages));
            }
            System.exit(1);
        }
        return response.body();
    }

    /** Like %g with trailing zeros removed: 6 significant digits by default. */
    static String g(Object value, int digits) {
        double v = (Double) value;
        if (v == 0.0) return "0";
        String text = new java.math.BigDecimal(v).round(new java.math.MathContext(digits)).stripTrailingZeros()
                .toString();
        return text.replace("E", "e");
    }

    /** A small strict JSON reader: objects -> LinkedHashMap, arrays -> ArrayList, numbers -> Double. */
    static final class Json {
        private final String text;
        private int pos;
        private final Map<String, int[]> spans = new LinkedHashMap<>();

        private Json(String text) {
            this.text = text;
        }

        @SuppressWarnings("unchecked")
        static Map<String, Object> object(String text) {
            Json reader = new Json(text);
            Object value = reader.value(true);
            reader.skipSpace();
            if (reader.pos != text.length()) throw reader.error("trailing characters");
            return (Map<String, Object>) value;
        }

        /** The exact source text of one member of the top-level object. */
        static String rawMember(String text, String name) {
            Json reader = new Json(text);
            reader.value(true);
            int[] span = reader.spans.get(name);
            if (span == null) throw new IllegalArgumentException("no member " + name);
            return text.substring(span[0], span[1]);
        }

        private Object value(boolean top) {
            skipSpace();
            if (pos >= text.length()) throw error("unexpected end");
            char c = text.charAt(pos);
            if (c == '{') return members(top);
            if (c == '[') return elements();
            if (c == '"') return string();
            if (text.startsWith("true", pos)) { pos += 4; return Boolean.TRUE; }
            if (text.startsWith("false", pos)) { pos += 5; return Boolean.FALSE; }
            if (text.startsWith("null", pos)) { pos += 4; return null; }
            return number();
        }

        private Map<String, Object> members(boolean top) {
            Map<String, Object> out = new LinkedHashMap<>();
            pos++;
            skipSpace();
            if (peek() == '}') { pos++; return out; }
            while (true) {
                skipSpace();
                String key = string();
                skipSpace();
                expect(':');
                skipSpace();
                int start = pos;
                out.put(key, value(false));
                if (top) spans.put(key, new int[] {start, pos});
                skipSpace();
                if (peek() == ',') { pos++; continue; }
                expect('}');
                return out;
            }
        }

        private List<Object> elements() {
            List<Object> out = new ArrayList<>();
            pos++;
            skipSpace();
            if (peek() == ']') { pos++; return out; }
            while (true) {
                out.add(value(false));
                skipSpace();
                if (peek() == ',') { pos++; continue; }
                expect(']');
                return out;
            }
        }

        private String string() {
            expect('"');
            StringBuilder out = new StringBuilder();
            while (true) {
                char c = text.charAt(pos++);
                if (c == '"') return out.toString();
                if (c != '\\') { out.append(c); continue; }
                char e = text.charAt(pos++);
                switch (e) {
                    case 'n' -> out.append('\n');
                    case 't' -> out.append('\t');
                    case 'r' -> out.append('\r');
                    case 'b' -> out.append('\b');
                    case 'f' -> out.append('\f');
                    case 'u' -> { out.append((char) Integer.parseInt(text.substring(pos, pos + 4), 16)); pos += 4; }
                    default -> out.append(e);  // \" \\ \/
                }
            }
        }

        private Double number() {
            int start = pos;
            while (pos < text.length() && "+-0123456789.eE".indexOf(text.charAt(pos)) >= 0) pos++;
            if (start == pos) throw error("unexpected character");
            return Double.valueOf(text.substring(start, pos));
        }

        private void skipSpace() {
            while (pos < text.length() && Character.isWhitespace(text.charAt(pos))) pos++;
        }

        private char peek() {
            return pos < text.length() ? text.charAt(pos) : '\0';
        }

        private void expect(char c) {
            if (peek() != c) throw error("expected '" + c + "'");
            pos++;
        }

        private IllegalArgumentException error(String what) {
            return new IllegalArgumentException("JSON: " + what + " at position " + pos);
        }
    }
}
