"""The browser page in a real browser: Debian's headless Chromium driven by Selenium (PyPI).
It fills the form of a process built from its description, runs a job, waits for completion and
finds the preview map and the download link; a screenshot is kept in
target/test-output/service/page.png."""

from selenium import webdriver
from selenium.webdriver.chrome.service import Service
from selenium.webdriver.common.by import By
from selenium.webdriver.support import expected_conditions as when
from selenium.webdriver.support.ui import Select, WebDriverWait

from conftest import OUT, RECORDS


def browser():
    options = webdriver.ChromeOptions()
    options.binary_location = "/usr/bin/chromium"
    for arg in ("--headless=new", "--no-sandbox", "--disable-dev-shm-usage",
                "--window-size=1400,1800"):
        options.add_argument(arg)
    return webdriver.Chrome(service=Service("/usr/bin/chromedriver"), options=options)


def test_the_page_runs_a_job_and_shows_its_results(server):
    driver = browser()
    try:
        driver.get(server.url + "/")
        wait = WebDriverWait(driver, 120)
        wait.until(when.element_to_be_clickable((By.ID, "process-density"))).click()
        wait.until(when.visibility_of_element_located((By.ID, "input-layer")))
        # Built from the description's JSON Schema: an enum is a choice with its default,
        # a file input a choice of workspace files, units from the option name.
        kernel = Select(driver.find_element(By.ID, "input-kernel"))
        assert kernel.first_selected_option.text == "quartic"
        assert "metres" in driver.find_element(By.CSS_SELECTOR, "label[for=input-bandwidth-m]").text
        Select(driver.find_element(By.ID, "input-input")).select_by_visible_text("sample.gpkg")
        driver.find_element(By.ID, "input-layer").send_keys(RECORDS)
        for name, value in (("permutations", "0"), ("cell-m", "1000")):
            box = driver.find_element(By.ID, f"input-{name}")
            box.clear()
            box.send_keys(value)
        driver.find_element(By.ID, "run-button").click()
        status = driver.find_element(By.ID, "job-status")
        # textContent: the page shows the status in capitals through CSS.
        wait.until(lambda d: status.get_attribute("textContent") in ("successful", "failed"))
        assert status.get_attribute("textContent") == "successful", \
            driver.find_element(By.ID, "job-message").text
        download = wait.until(when.presence_of_element_located((By.ID, "download")))
        assert download.get_attribute("href").endswith("/download")
        preview = wait.until(when.visibility_of_element_located((By.ID, "preview")))
        wait.until(lambda d: d.execute_script(
            "const i = document.getElementById('preview'); return i.complete && i.naturalWidth > 0;"))
        assert preview.get_attribute("data-layer").startswith("density_")
        assert "density_support" in driver.find_element(By.ID, "summary").text
        assert driver.find_element(By.ID, "job-progress").get_attribute("value") == "100"
        driver.execute_script("window.scrollTo(0, 0)")
        OUT.mkdir(parents=True, exist_ok=True)
        driver.save_screenshot(str(OUT / "page.png"))
    finally:
        driver.quit()
